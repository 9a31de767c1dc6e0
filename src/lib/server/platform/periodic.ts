/**
 * Run an async job every `everyMs` without overlapping runs (a run still going when the next
 * tick comes skips that tick). The timer does not keep the process alive. Returns the stop function.
 */
export function every(everyMs: number, job: () => Promise<unknown>, label: string): () => void {
	let running = false;
	const timer = setInterval(() => {
		if (running) return;
		running = true;
		job()
			.catch((e) => console.error(`${label} failed`, e))
			.finally(() => (running = false));
	}, everyMs);
	timer.unref();
	return () => clearInterval(timer);
}
