import { describe, expect, it } from 'vitest';
import { randomId, randomToken } from './auth';

describe('random ids and tokens', () => {
	it('never repeats across refills of the reserve, and keeps the length and alphabet', () => {
		// 20,000 ids of 12 bytes: the 4 kB reserve is refilled about 60 times on the way.
		const ids = Array.from({ length: 20_000 }, () => randomId());
		expect(new Set(ids).size).toBe(ids.length);
		for (const id of ids.slice(0, 500)) expect(id).toMatch(/^[a-z2-7]{20}$/);
		expect(randomToken()).toMatch(/^[a-z2-7]{32}$/);
		// More than the reserve holds at once.
		expect(randomToken(6000)).toHaveLength(9600);
	});

	it('spreads its bits: each base-32 symbol about equally often', () => {
		const counts = new Map<string, number>();
		for (let k = 0; k < 4000; k++) for (const c of randomToken(20)) counts.set(c, (counts.get(c) ?? 0) + 1);
		expect(counts.size).toBe(32);
		// 128,000 symbols: 4,000 expected each; ±10 % is over 6 standard deviations.
		for (const n of counts.values()) expect(Math.abs(n - 4000)).toBeLessThan(400);
	});
});
