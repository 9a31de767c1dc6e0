/**
 * Background work: jobs run every so often, and jobs run one at a time in arrival order. Both are
 * kept as named services (services.ts) by their users, so a hot reload or a second install never
 * leaves two copies running.
 */
import type { Running } from './services';

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

/**
 * Jobs run one at a time in the order they were queued (a job returning a promise, until it settles), each off the caller's stack (queued from
 * a live-message listener, a job must not run inside the `record()` call that told it). A job that
 * throws is logged and the next one runs. After `stop`, jobs not yet started are dropped.
 */
export class JobQueue implements Running {
	private tail: Promise<unknown> = Promise.resolve();
	private stopped = false;

	constructor(private readonly label: string) {}

	enqueue(job: () => unknown): void {
		this.tail = this.tail.then(
			() =>
				new Promise<void>((resolve) =>
					setImmediate(() => {
						// A job that waits (on the work pool, say) holds the queue until it has finished.
						new Promise<unknown>((done) => done(this.stopped ? undefined : job()))
							.catch((e) => console.error(`${this.label} failed`, e))
							.finally(resolve);
					})
				)
		);
	}

	/** Resolves when every job queued so far, and every job those queued, has finished. */
	async idle(): Promise<void> {
		let seen: Promise<unknown>;
		do {
			seen = this.tail;
			await seen;
		} while (seen !== this.tail);
	}

	stop(): void {
		this.stopped = true;
	}
}
