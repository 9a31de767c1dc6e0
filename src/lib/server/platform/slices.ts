/**
 * Long work on the server's thread done in slices with rests between, so that requests and live
 * messages keep their share of the thread: a slice runs until `sliceMs` have passed, then a rest of
 * `restMs` (a timer, so that I/O and other requests run; 0 = one turn of the event loop).
 * With equal slice and rest the work takes at most about half of the thread, however long it is.
 */
export interface Slices {
	/** True once the current slice has used its time. */
	due(): boolean;
	/** Rest, then start a new slice. */
	rest(): Promise<void>;
	/** Rest only when the slice is used up. */
	pause(): Promise<void>;
}

export function slices(sliceMs: number, restMs: number): Slices {
	let ends = performance.now() + sliceMs;
	const s: Slices = {
		due: () => performance.now() >= ends,
		async rest() {
			await new Promise((resolve) => (restMs > 0 ? setTimeout(resolve, restMs) : setImmediate(resolve)));
			ends = performance.now() + sliceMs;
		},
		pause: () => (s.due() ? s.rest() : Promise.resolve())
	};
	return s;
}
