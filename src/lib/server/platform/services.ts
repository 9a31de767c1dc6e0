/**
 * The long-lived parts of the server process — the live hub's state, the periodic checks, the
 * background job queues, the alert listener — each kept once per process under a name.
 *
 * They live on globalThis rather than in module variables: vite's hot reload evaluates a changed
 * module again, and a module variable would then start a second timer or forget the listeners
 * the first copy registered. Tests stop them by name.
 */

export interface Running {
	stop(): void | Promise<void>;
}

const REGISTRY = Symbol.for('strainline.services');

function registry(): Map<string, Running> {
	const g = globalThis as unknown as Record<symbol, Map<string, Running> | undefined>;
	return (g[REGISTRY] ??= new Map());
}

/** The running `name`, started with `start` when it is not running yet. */
export function service<T extends Running>(name: string, start: () => T): T {
	const all = registry();
	let running = all.get(name) as T | undefined;
	if (!running) {
		running = start();
		all.set(name, running);
	}
	return running;
}

/**
 * Start `name` afresh: the instance already running (an earlier install, or the copy from before
 * a hot reload) is stopped first. Returns the function that stops this instance; once another
 * has replaced it, that function leaves the newer one alone.
 */
export function restartService(name: string, start: () => Running): () => void {
	void stopService(name);
	const running = service(name, start);
	return () => void stopService(name, running);
}

/** Stop `name` if it runs (only when it is still `instance`, if given). */
export function stopService(name: string, instance?: Running): void | Promise<void> {
	const all = registry();
	const running = all.get(name);
	if (!running || (instance && running !== instance)) return;
	all.delete(name);
	return running.stop();
}

/** The running `name`, or null. */
export function runningService<T extends Running>(name: string): T | null {
	return (registry().get(name) as T | undefined) ?? null;
}
