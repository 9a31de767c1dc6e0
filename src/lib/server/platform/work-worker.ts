/**
 * The worker entry of the work pool and the I/O pool: runs one task by name and sends its result
 * back with the result's whole-buffer typed arrays transferred. Thin on purpose: it loads the two
 * task tables (the pure modules' computations; the downloads) and tinypool's marker for movable
 * results, nothing else. Built on its own to
 * `build/work-worker.js` for the built app (vite.config.ts); run from source under vitest and tsx.
 */
import { readlinkSync } from 'node:fs';
import { setPriority } from 'node:os';
import { isMainThread } from 'node:worker_threads';
import { kTransferable, kValue, markMovable } from 'tinypool';
import { ERROR_CLASSES, TASKS, type TaskName } from './work-tasks.ts';
import { IO_ERROR_CLASSES, IO_TASKS } from './io-tasks.ts';
import { buffersOf } from './work-memory.ts';

/**
 * How much nicer than the server's thread a worker thread runs (Linux nice levels, 0–19): on a
 * small machine the pool's long computations then give way to requests and live messages (the
 * live bench's broadcasts waited behind a map's analysis on the other core), and take the CPU
 * whenever the server's thread is idle, which is most of the time.
 */
export const WORKER_NICENESS = 10;

/**
 * Lower this worker thread's scheduling priority. Linux applies setpriority(PRIO_PROCESS, tid) to
 * the one thread; the thread's id is read from /proc/thread-self. Elsewhere (or without /proc)
 * nothing changes. Returns the niceness set, or null.
 */
export function lowerThreadPriority(niceness = WORKER_NICENESS): number | null {
	try {
		const tid = Number(readlinkSync('/proc/thread-self').split('/').pop());
		if (!Number.isInteger(tid) || tid <= 0) return null;
		setPriority(tid, niceness);
		return niceness;
	} catch {
		return null;
	}
}
// Never the server's own thread (a test may load this module there).
if (!isMainThread) lowerThreadPriority();

/** A task's failure as plain data: its class name (when the server knows it), message and own fields. */
export interface EncodedError {
	name: string;
	message: string;
	stack?: string;
	fields: Record<string, unknown>;
}

export type WorkReply = { ok: true; value: unknown } | { ok: false; error: EncodedError };

/** Error classes the server's thread rebuilds by name, of both task tables. */
const KNOWN_ERRORS = { ...ERROR_CLASSES, ...IO_ERROR_CLASSES };

function encodeError(e: unknown): EncodedError {
	if (!(e instanceof Error)) return { name: 'Error', message: String(e), fields: {} };
	const fields: Record<string, unknown> = {};
	for (const [k, v] of Object.entries(e)) if (v === null || ['string', 'number', 'boolean'].includes(typeof v)) fields[k] = v;
	const name = Object.keys(KNOWN_ERRORS).find((n) => e.constructor === KNOWN_ERRORS[n]) ?? e.name;
	return { name, message: e.message, stack: e.stack, fields };
}

/** One task by name: a computation (`TASKS`) or, on the I/O pool's threads, a transfer (`IO_TASKS`, awaited). */
export default async function runTask(message: { task: string; input: unknown; io?: boolean }): Promise<unknown> {
	let reply: WorkReply;
	const table = (message.io ? IO_TASKS : TASKS) as Record<string, ((input: unknown) => unknown) | undefined>;
	const fn = table[message.task];
	try {
		if (!fn) throw new Error(`the ${message.io ? 'I/O' : 'work'} pool has no task named "${message.task}"`);
		reply = { ok: true, value: await fn(message.input) };
	} catch (e) {
		reply = { ok: false, error: encodeError(e) };
	}
	const transfer = buffersOf(reply);
	const movable = { [kTransferable]: transfer, [kValue]: reply };
	markMovable(movable);
	return movable;
}

export type { TaskName };
