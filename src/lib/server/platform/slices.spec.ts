import { describe, expect, it } from 'vitest';
import { slices } from './slices';

describe('work in slices with rests', () => {
	it('lets a timer set before the work run while the work goes on, and rests only when a slice is used up', async () => {
		expect.hasAssertions();
		const s = slices(5, 5);
		let timerRanAtStep = -1;
		setTimeout(() => (timerRanAtStep = step), 0);
		let step = 0;
		let rests = 0;
		const t0 = performance.now();
		for (; step < 2000; step++) {
			const busyUntil = performance.now() + 0.05;
			while (performance.now() < busyUntil) {
				/* 50 µs of work */
			}
			if (s.due()) rests++;
			await s.pause();
		}
		const elapsed = performance.now() - t0;
		// ≈ 100 ms of work in 5 ms slices: about 20 rests, and the timer ran in the first rest, not after the work.
		expect(rests).toBeGreaterThanOrEqual(10);
		expect(rests).toBeLessThanOrEqual(40);
		expect(timerRanAtStep).toBeGreaterThan(0);
		expect(timerRanAtStep).toBeLessThan(2000);
		expect(elapsed).toBeGreaterThan(100);
	});
});
