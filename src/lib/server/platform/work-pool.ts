/**
 * The work pool: CPU-heavy computations (sky maps, rankings, tilings, the network plan, spectra)
 * run on worker threads so that the server's event loop only does I/O and every other request is
 * answered while a large map is read. tinypool (see DEVELOPERS.md, "Heavy work: the work pool").
 *
 *  - At most max(1, cores − 1) threads; at most WORK_QUEUE_MAX tasks wait, beyond that a task is
 *    refused at once with `WorkPoolBusyError` (503) rather than piling up memory.
 *  - Inputs named in `transfer` move to the worker (the caller's view becomes empty); results come
 *    back with their typed arrays transferred; a pure module's error comes back as its own class.
 *  - The worker file: `work-worker-source.js` beside this module when running from source (vitest,
 *    tsx, vite dev; it loads `work-worker.ts` through tsx), `work-worker.js` in the build folder
 *    for the built app (written by vite.config.ts after the adapter).
 *  - `useInlineWork(true)` runs tasks on the calling thread instead. For tests that ask for it
 *    explicitly; nothing falls back to it silently.
 */
import { availableParallelism } from 'node:os';
import { existsSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import Tinypool from 'tinypool';
import { runningService, service, stopService } from './services';
import { DomainError } from './errors';
import { WORK_QUEUE_MAX } from '../../limits';
import type { EncodedError, WorkReply } from './work-worker.ts';
import { ERROR_CLASSES, type TaskInput, type TaskName, type TaskOutput } from './work-tasks.ts';
import { IO_ERROR_CLASSES, type IoTaskInput, type IoTaskName, type IoTaskOutput } from './io-tasks.ts';

/** File name of the worker entry in the built app (next to build/index.js). */
export const BUILT_WORKER_FILE = 'work-worker.js';

/** Every thread busy and WORK_QUEUE_MAX tasks already waiting: the caller may try again shortly. */
export class WorkPoolBusyError extends DomainError {
	constructor(task: string) {
		super(503, 'busy', `The server is busy with other heavy work (${WORK_QUEUE_MAX} tasks waiting); "${task}" was not started. Please try again in a minute.`);
	}
}

/** Threads the pool may start: one core is left to the event loop. */
export function workThreads(cores = availableParallelism()): number {
	return Math.max(1, cores - 1);
}

interface WorkerLocation {
	filename: string;
}

/**
 * Where the worker entry is. From source, `work-worker-source.js` beside this module, which
 * registers tsx in the worker and loads `work-worker.ts`. Built,
 * the first `work-worker.js` found walking up from this chunk (adapter-node puts chunks at
 * varying depths under build/).
 */
export function workerLocation(moduleUrl = import.meta.url): WorkerLocation {
	const here = fileURLToPath(moduleUrl);
	if (here.endsWith('.ts')) {
		return { filename: join(dirname(here), 'work-worker-source.js') };
	}
	let dir = dirname(here);
	for (let up = 0; up < 5; up++) {
		const candidate = join(dir, BUILT_WORKER_FILE);
		if (existsSync(candidate)) return { filename: candidate };
		const parent = dirname(dir);
		if (parent === dir) break;
		dir = parent;
	}
	throw new Error(`the work pool's worker file ${BUILT_WORKER_FILE} was not found above ${dirname(here)}; build the app with \`npx vite build\``);
}

/**
 * Threads of the I/O pool: downloads wait on the network, not the CPU, so two may run at once
 * beside the work pool's computations (a new map and a retried one, say).
 */
export const IO_THREADS = 2;

class WorkPool {
	readonly pool: Tinypool;
	constructor(maxThreads: number) {
		const where = workerLocation();
		this.pool = new Tinypool({
			filename: pathToFileURL(where.filename).href,
			minThreads: 0,
			maxThreads,
			maxQueue: WORK_QUEUE_MAX,
			// Idle threads end after a minute: a worker holds copies of nothing, but its heap is not free.
			idleTimeout: 60_000
		});
	}
	stop(): Promise<void> {
		return this.pool.destroy();
	}
}

const POOL = 'work-pool';
const IO_POOL = 'io-pool';
const INLINE = Symbol.for('strainline.work-pool.inline');

function inlineWork(): boolean {
	return (globalThis as Record<symbol, unknown>)[INLINE] === true;
}

/** Run tasks on the calling thread (tests that ask for it; see the module comment). */
export function useInlineWork(inline: boolean): void {
	(globalThis as Record<symbol, unknown>)[INLINE] = inline;
}

function decodeError(e: EncodedError): Error {
	const Ctor = ERROR_CLASSES[e.name] ?? IO_ERROR_CLASSES[e.name];
	const error: Error = Object.create((Ctor ?? Error).prototype);
	Object.assign(error, e.fields);
	Object.defineProperty(error, 'message', { value: e.message, writable: true, configurable: true });
	if (!Ctor) error.name = e.name;
	// Only plain values cross the thread; a refusal's per-field messages (none for the errors that
	// cross today) come back empty rather than missing, so that it answers like one made here.
	if (error instanceof DomainError && !error.fields) Object.defineProperty(error, 'fields', { value: {}, enumerable: true });
	if (e.stack) Object.defineProperty(error, 'stack', { value: e.stack, writable: true, configurable: true });
	return error;
}

/**
 * Run `task` on a worker thread. `transfer` lists buffers of `input` to move rather than copy
 * (take them from `ownedBytes`/`buffersOf` in work-memory.ts; the caller must not use them
 * afterwards — a task that needs to give bytes back returns them).
 */
export async function runWork<K extends TaskName>(task: K, input: TaskInput<K>, options: { transfer?: ArrayBuffer[] } = {}): Promise<TaskOutput<K>> {
	if (inlineWork()) {
		const { TASKS } = await import('./work-tasks.ts');
		return (TASKS[task] as (input: TaskInput<K>) => TaskOutput<K>)(input);
	}
	return (await runOn(POOL, workThreads(), { task, input }, options.transfer ?? [])) as TaskOutput<K>;
}

/**
 * Run a transfer (`IO_TASKS`: a sky-map download) on a thread of the I/O pool, apart from the
 * work pool's computations. The result's buffers come back moved. Under `useInlineWork(true)` it
 * runs on the calling thread like the computations.
 */
export async function runIo<K extends IoTaskName>(task: K, input: IoTaskInput<K>): Promise<IoTaskOutput<K>> {
	if (inlineWork()) {
		const { IO_TASKS } = await import('./io-tasks.ts');
		return (await (IO_TASKS[task] as (input: IoTaskInput<K>) => Promise<IoTaskOutput<K>>)(input)) as IoTaskOutput<K>;
	}
	return (await runOn(IO_POOL, IO_THREADS, { task, input, io: true }, [])) as IoTaskOutput<K>;
}

const ranOnPool = new Map<string, number>();

/** One message to the named pool (started with `threads` threads when first used); its value, or its error rebuilt. */
async function runOn(name: string, threads: number, message: { task: string; input: unknown; io?: boolean }, transferList: ArrayBuffer[]): Promise<unknown> {
	const { pool } = service(name, () => new WorkPool(threads));
	let reply: WorkReply;
	try {
		reply = await pool.run(message, { transferList });
	} catch (e) {
		if (e instanceof Error && e.message === 'Task queue is at limit') throw new WorkPoolBusyError(message.task);
		throw e;
	}
	ranOnPool.set(message.task, (ranOnPool.get(message.task) ?? 0) + 1);
	if (!reply.ok) throw decodeError(reply.error);
	return reply.value;
}

/** Tasks of this name that ran on the pool's threads since the process started (inline runs are not counted; diagnostics, tests). */
export function workDone(task: TaskName | IoTaskName): number {
	return ranOnPool.get(task) ?? 0;
}

/** Tasks running and waiting now (diagnostics, tests). */
export function workLoad(): { threads: number; queued: number } {
	const running = runningService<WorkPool>(POOL);
	return running ? { threads: running.pool.threads.length, queued: running.pool.queueSize } : { threads: 0, queued: 0 };
}

/** End the pools' threads (shutdown, tests); the next task starts a new pool. */
export async function stopWorkPool(): Promise<void> {
	await stopService(POOL);
	await stopService(IO_POOL);
}
