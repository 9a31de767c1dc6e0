import { describe, expect, it } from 'vitest';
import { niceStep, skyProjection, skyWindow, splitAtSeam, stepPoints } from './charts.ts';

describe('report drawings', () => {
	it('opens the sky window on the smallest RA arc, across RA 0 too', () => {
		expect.assertions(4);
		const w = skyWindow([[359, -10], [1, -12], [3, -11]], 2, 4)!;
		expect(w.raCentreDeg).toBeCloseTo(1, 9);
		expect(w.raHalfSpanDeg).toBeCloseTo(4, 9);
		const p = skyProjection(w, { x: 0, y: 0, width: 100, height: 100 });
		// RA grows to the left.
		expect(p.project(3, -11)[0]).toBeLessThan(p.project(359, -11)[0]);
		expect(splitAtSeam([[170, 0], [175, 0], [-178 + 360, 0]], skyWindow([[0, 0], [20, 0]], 0, 4)!)).toHaveLength(1);
	});

	it('draws steps and picks round axis steps', () => {
		expect.assertions(3);
		expect(stepPoints([{ hoursSinceMerger: 1, value: 0.2 }, { hoursSinceMerger: 2, value: 0.5 }], 3)).toEqual([[1, 0], [1, 0], [1, 0.2], [2, 0.2], [2, 0.5], [3, 0.5]]);
		expect(niceStep(3.5)).toBe(0.5);
		expect(niceStep(100, 4)).toBe(20);
	});
});
