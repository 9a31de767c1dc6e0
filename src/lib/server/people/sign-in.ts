import { and, eq, gt, lt } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { config } from '../platform/config';
import { verifyPassword, hashPassword } from './auth';

export type SignInResult =
	| { ok: true; userId: string }
	| { ok: false; reason: 'invalid' | 'disabled' | 'limited'; retryAfterS?: number };

// A hash to verify against when the address is unknown, so both paths take as long.
let decoyHash: Promise<string> | null = null;

function failuresSince(key: string, since: Date): number {
	return db
		.select({ id: table.signInAttempt.id })
		.from(table.signInAttempt)
		.where(and(eq(table.signInAttempt.key, key), eq(table.signInAttempt.succeeded, false), gt(table.signInAttempt.createdAt, since)))
		.all().length;
}

/**
 * Check a password with a limit on failed attempts per address and per client within a
 * sliding window (settings SIGN_IN_ATTEMPTS / SIGN_IN_WINDOW_MINUTES).
 */
export async function signIn(email: string, password: string, clientAddress: string, now = new Date()): Promise<SignInResult> {
	const { attempts, windowMs } = config.signInLimit;
	const since = new Date(now.getTime() - windowMs);
	const keys = [`email:${email.toLowerCase()}`, `ip:${clientAddress}`];
	if (keys.some((k) => failuresSince(k, since) >= attempts)) {
		return { ok: false, reason: 'limited', retryAfterS: Math.ceil(windowMs / 1000) };
	}
	const found = db.select().from(table.user).where(eq(table.user.email, email.toLowerCase())).get();
	decoyHash ??= hashPassword('not-a-real-password-' + Math.random());
	const valid = await verifyPassword(found?.passwordHash ?? (await decoyHash), password);
	const succeeded = Boolean(found && valid);
	db.transaction((tx) => {
		for (const key of keys) tx.insert(table.signInAttempt).values({ key, succeeded, createdAt: now }).run();
		tx.delete(table.signInAttempt).where(lt(table.signInAttempt.createdAt, new Date(now.getTime() - 24 * 3600_000))).run();
	});
	if (!found || !valid) return { ok: false, reason: 'invalid' };
	if (found.disabledAt) return { ok: false, reason: 'disabled' };
	return { ok: true, userId: found.id };
}
