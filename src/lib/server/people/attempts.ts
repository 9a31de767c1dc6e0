import { and, asc, desc, eq, gt, lt } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';

/**
 * Counting attempts per key for rate limits (sign-in failures, reset requests, text replies to
 * pages). Keys carry their purpose as a prefix (`email:`, `ip:`, `reset-email:`, `reset-ip:`,
 * `reply-from:`, `reply-ip:`); rows older than a day are dropped whenever new ones are written.
 */
const KEEP_MS = 24 * 3600_000;

export interface AttemptCount {
	count: number;
	/** When the oldest and newest counted attempt happened (null when none). */
	oldest: Date | null;
	newest: Date | null;
}

/** Attempts for `key` after `since` (only failed ones with `failedOnly`). */
export function attemptsSince(key: string, since: Date, failedOnly = false): AttemptCount {
	const where = and(
		eq(table.signInAttempt.key, key),
		gt(table.signInAttempt.createdAt, since),
		failedOnly ? eq(table.signInAttempt.succeeded, false) : undefined
	);
	const rows = db.select({ createdAt: table.signInAttempt.createdAt }).from(table.signInAttempt).where(where).orderBy(asc(table.signInAttempt.createdAt)).all();
	return { count: rows.length, oldest: rows[0]?.createdAt ?? null, newest: rows.at(-1)?.createdAt ?? null };
}

/** The latest successful attempt for `key`, or null. */
export function lastSuccess(key: string): Date | null {
	return (
		db
			.select({ createdAt: table.signInAttempt.createdAt })
			.from(table.signInAttempt)
			.where(and(eq(table.signInAttempt.key, key), eq(table.signInAttempt.succeeded, true)))
			.orderBy(desc(table.signInAttempt.createdAt))
			.get()?.createdAt ?? null
	);
}

export function recordAttempt(keys: readonly string[], succeeded: boolean, now: Date): void {
	db.transaction((tx) => {
		for (const key of keys) tx.insert(table.signInAttempt).values({ key, succeeded, createdAt: now }).run();
		tx.delete(table.signInAttempt).where(lt(table.signInAttempt.createdAt, new Date(now.getTime() - KEEP_MS))).run();
	});
}

/** Seconds until the oldest attempt in a full window leaves it. */
export function secondsUntilWindowFrees(oldest: Date | null, windowMs: number, now: Date): number {
	if (!oldest) return 0;
	return Math.max(1, Math.ceil((oldest.getTime() + windowMs - now.getTime()) / 1000));
}
