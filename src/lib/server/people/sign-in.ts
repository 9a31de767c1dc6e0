import { eq } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { config } from '../platform/config';
import { verifyPassword, hashPassword } from './auth';
import { attemptsSince, lastSuccess, recordAttempt, secondsUntilWindowFrees } from './attempts';

export type SignInResult =
	| { ok: true; userId: string }
	| { ok: false; reason: 'invalid' | 'disabled' | 'limited'; retryAfterS?: number; limitedBy?: 'client' | 'account' };

// A hash to verify against when the address is unknown, so both paths take as long.
let decoyHash: Promise<string> | null = null;

// Failures older than this no longer slow an account down.
const ACCOUNT_MEMORY_MS = 24 * 3600_000;

/**
 * How long an account waits before the next try after `failures` failures in a row: nothing for
 * the first `free`, then 1 s, doubling with each further failure, up to `maxMs`.
 */
export function accountDelayMs(failures: number, free: number, maxMs: number): number {
	if (failures < free) return 0;
	return Math.min(maxMs, 1000 * 2 ** Math.min(30, failures - free));
}

/**
 * Check a password, limited twice (settings in config.signInLimit):
 * - per client address first: after SIGN_IN_ATTEMPTS failures within SIGN_IN_WINDOW_MINUTES that
 *   client waits, whichever accounts it tried;
 * - per account (known or not, so the answer tells nothing): a growing delay between tries after a
 *   few failures in a row, instead of a lock-out, so that strangers guessing from many addresses
 *   cannot keep the owner out for long. A success starts the count over.
 * Refused tries are not counted, so waiting out a delay is never made longer by trying.
 */
export async function signIn(email: string, password: string, clientAddress: string, now = new Date()): Promise<SignInResult> {
	const { attempts, windowMs, accountFreeFailures, accountMaxDelayMs } = config.signInLimit;
	const accountKey = `email:${email.toLowerCase()}`;
	const clientKey = `ip:${clientAddress}`;

	const byClient = attemptsSince(clientKey, new Date(now.getTime() - windowMs), true);
	if (byClient.count >= attempts) {
		return { ok: false, reason: 'limited', limitedBy: 'client', retryAfterS: secondsUntilWindowFrees(byClient.oldest, windowMs, now) };
	}
	const memoryStart = now.getTime() - ACCOUNT_MEMORY_MS;
	const success = lastSuccess(accountKey);
	const byAccount = attemptsSince(accountKey, new Date(Math.max(memoryStart, success ? success.getTime() : memoryStart)), true);
	const delayMs = accountDelayMs(byAccount.count, accountFreeFailures, accountMaxDelayMs);
	if (delayMs > 0 && byAccount.newest && now.getTime() < byAccount.newest.getTime() + delayMs) {
		const retryAfterS = Math.max(1, Math.ceil((byAccount.newest.getTime() + delayMs - now.getTime()) / 1000));
		return { ok: false, reason: 'limited', limitedBy: 'account', retryAfterS };
	}

	const found = db.select().from(table.user).where(eq(table.user.email, email.toLowerCase())).get();
	decoyHash ??= hashPassword('not-a-real-password-' + Math.random());
	const valid = await verifyPassword(found?.passwordHash ?? (await decoyHash), password);
	const succeeded = Boolean(found && valid);
	recordAttempt([accountKey, clientKey], succeeded, now);
	if (!found || !valid) return { ok: false, reason: 'invalid' };
	if (found.disabledAt) return { ok: false, reason: 'disabled' };
	return { ok: true, userId: found.id };
}
