import { describe, expect, it } from 'vitest';
import { thinStepCurve } from './step-curve.ts';

describe('thinStepCurve', () => {
	it('leaves a short curve alone', () => {
		expect.hasAssertions();
		const c: [number, number][] = [[0, 0], [1, 0.2], [2, 0.5]];
		expect(thinStepCurve(c, 10)).toEqual(c);
	});

	it('keeps the ends and the value reached by the end of each slice, within max points', () => {
		expect.hasAssertions();
		// A rising union: 10,000 steps over 10 h.
		const c: [number, number][] = Array.from({ length: 10_000 }, (_, k) => [k / 1000, Math.sqrt(k / 10_000)]);
		const thin = thinStepCurve(c, 100);
		expect(thin.length).toBeLessThanOrEqual(100);
		expect(thin[0]).toEqual(c[0]);
		expect(thin.at(-1)).toEqual(c.at(-1));
		// Every kept point is a point of the curve, in order.
		const xs = thin.map((p) => p[0]);
		expect(xs).toEqual([...xs].sort((a, b) => a - b));
		for (const p of thin) expect(p[1]).toBeCloseTo(Math.sqrt(p[0] / 10), 12);
		// No gap between kept points wider than two slices (the last point of one slice to the last of the next).
		for (let k = 1; k < thin.length; k++) expect(thin[k][0] - thin[k - 1][0]).toBeLessThanOrEqual((2 * 10) / 98);
	});
});
