import { describe, expect, it } from 'vitest';
import { drawnFootprints } from './drawn-footprints.ts';

const square = { shape: 'rectangle' as const, widthDeg: 1, heightDeg: 1 };
const round = { shape: 'circle' as const, diameterDeg: 1 };

describe('drawnFootprints', () => {
	it('draws repeats at one place once, with their count and the latest of them', () => {
		expect.hasAssertions();
		const items = [
			{ id: 'a1', raDeg: 10, decDeg: 5, timeMs: 1, round: false },
			{ id: 'a2', raDeg: 10, decDeg: 5, timeMs: 3, round: false },
			{ id: 'b', raDeg: 10, decDeg: 5, timeMs: 2, round: true },
			{ id: 'c', raDeg: 10.01, decDeg: 5, timeMs: 4, round: false }
		];
		const { drawn, places } = drawnFootprints(items, (i) => (i.round ? round : square), 10);
		expect(places).toBe(3);
		expect(drawn.map((d) => [d.latest.id, d.count])).toEqual([
			['b', 1],
			['a2', 2],
			['c', 1]
		]);
	});

	it('keeps the places pointed at most recently when there are more than max', () => {
		expect.hasAssertions();
		const items = Array.from({ length: 50 }, (_, k) => ({ raDeg: k, decDeg: 0, timeMs: 1000 - k }));
		const { drawn, places } = drawnFootprints(items, () => square, 5);
		expect(places).toBe(50);
		expect(drawn.map((d) => d.latest.raDeg)).toEqual([4, 3, 2, 1, 0]);
	});
});
