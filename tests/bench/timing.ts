/** Timing helpers shared by the benchmarks (apart from run.ts, which runs every bench when loaded). */

/** Timings (ms) of `repeats` runs after `warmup` untimed ones (the JIT, like numpy's caches, needs a first pass). */
export function timeRuns(fn: () => void, repeats: number, warmup: number): number[] {
	for (let k = 0; k < warmup; k++) fn();
	const ms: number[] = [];
	for (let k = 0; k < repeats; k++) {
		const t0 = performance.now();
		fn();
		ms.push(performance.now() - t0);
	}
	return ms;
}

export function median(values: number[]): number {
	const s = [...values].sort((a, b) => a - b);
	const m = s.length >> 1;
	return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
}
