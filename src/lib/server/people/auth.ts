import type { RequestEvent } from '@sveltejs/kit';
import { eq, and, isNull, sql } from 'drizzle-orm';
import { createHash, randomBytes, randomFillSync } from 'node:crypto';
import { encodeBase32LowerCaseNoPadding } from '@oslojs/encoding';
import { hash, verify } from '@node-rs/argon2';
import { db, preparedQuery } from '../platform/db';
import * as table from '../platform/db/schema';
import type { Role } from '../platform/db/schema';

const DAY_MS = 24 * 60 * 60 * 1000;
export const SESSION_LIFETIME_MS = 30 * DAY_MS;
/** A session is renewed to the full lifetime once less than this remains (sliding expiry). */
export const SESSION_RENEW_MS = 15 * DAY_MS;
export const SESSION_COOKIE = 'strainline-session';

/** Argon2id parameters: at least OWASP's minimum (19 MiB, t=2, p=1). */
const ARGON2 = { memoryCost: 19456, timeCost: 2, outputLen: 32, parallelism: 1 } as const;

/** What the app knows of the signed-in person; a chosen subset of the row. */
export interface SessionUser {
	id: string;
	email: string;
	name: string;
	roles: Role[];
	teamIds: string[];
}

export interface SessionInfo {
	id: string;
	userId: string;
	expiresAt: Date;
}

export type SessionValidation =
	| { session: SessionInfo; user: SessionUser; fresh: boolean }
	| { session: null; user: null; fresh: false };

/**
 * Random bytes from the operating system's generator, drawn a few kilobytes at a time: asking it
 * once per id cost ≈ 16 µs a call, 150 ms for the ids of a 9,000-row upload. Bytes handed out are
 * wiped from the reserve, and none is handed out twice.
 */
const reserve = Buffer.alloc(4096);
let reserveAt = reserve.length;
function randomBytesNow(n: number): Uint8Array {
	if (n > reserve.length) return new Uint8Array(randomBytes(n));
	if (reserveAt + n > reserve.length) {
		randomFillSync(reserve);
		reserveAt = 0;
	}
	const out = Uint8Array.from(reserve.subarray(reserveAt, reserveAt + n));
	reserve.fill(0, reserveAt, reserveAt + n);
	reserveAt += n;
	return out;
}

export function randomToken(bytes = 20): string {
	return encodeBase32LowerCaseNoPadding(randomBytesNow(bytes));
}

export function randomId(): string {
	return randomToken(12);
}

export function hashToken(token: string): string {
	// Node's own SHA-256 (the same hex digest): it runs on every request, and a script hash cost ms.
	return createHash('sha256').update(token).digest('hex');
}

export function generateSessionToken(): string {
	return randomToken(20);
}

export async function hashPassword(password: string): Promise<string> {
	return hash(password, ARGON2);
}

export async function verifyPassword(passwordHash: string, password: string): Promise<boolean> {
	try {
		return await verify(passwordHash, password);
	} catch {
		return false;
	}
}

export function createSession(
	token: string,
	userId: string,
	meta: { userAgent?: string | null; ipAddress?: string | null } = {},
	now = new Date()
): SessionInfo {
	const session = {
		id: hashToken(token),
		userId,
		expiresAt: new Date(now.getTime() + SESSION_LIFETIME_MS),
		userAgent: meta.userAgent?.slice(0, 300) ?? null,
		ipAddress: meta.ipAddress ?? null
	};
	db.insert(table.session).values(session).run();
	return { id: session.id, userId, expiresAt: session.expiresAt };
}

export function loadSessionUser(userId: string): SessionUser | null {
	// Prepared once per connection: every signed-in request runs these.
	const userQuery = preparedQuery('auth.user', (d) =>
		d
			.select({ id: table.user.id, email: table.user.email, name: table.user.name, disabledAt: table.user.disabledAt })
			.from(table.user)
			.where(eq(table.user.id, sql.placeholder('userId')))
			.prepare()
	);
	const rolesQuery = preparedQuery('auth.roles', (d) =>
		d.select({ role: table.userRole.role }).from(table.userRole).where(eq(table.userRole.userId, sql.placeholder('userId'))).prepare()
	);
	const teamsQuery = preparedQuery('auth.teams', (d) =>
		d.select({ teamId: table.teamMember.teamId }).from(table.teamMember).where(eq(table.teamMember.userId, sql.placeholder('userId'))).prepare()
	);
	const row = userQuery.get({ userId });
	if (!row || row.disabledAt) return null;
	const roles = rolesQuery.all({ userId }).map((r) => r.role);
	const teamIds = teamsQuery.all({ userId }).map((r) => r.teamId);
	return { id: row.id, email: row.email, name: row.name, roles, teamIds };
}

/** Look the token up, drop it when expired, extend it when under the renewal threshold. */
export function validateSessionToken(token: string, now = new Date()): SessionValidation {
	const id = hashToken(token);
	const row = preparedQuery('auth.session', (d) => d.select().from(table.session).where(eq(table.session.id, sql.placeholder('id'))).prepare()).get({ id });
	if (!row) return { session: null, user: null, fresh: false };
	if (now.getTime() >= row.expiresAt.getTime()) {
		db.delete(table.session).where(eq(table.session.id, id)).run();
		return { session: null, user: null, fresh: false };
	}
	const user = loadSessionUser(row.userId);
	if (!user) {
		db.delete(table.session).where(eq(table.session.id, id)).run();
		return { session: null, user: null, fresh: false };
	}
	let expiresAt = row.expiresAt;
	let fresh = false;
	if (expiresAt.getTime() - now.getTime() < SESSION_RENEW_MS) {
		expiresAt = new Date(now.getTime() + SESSION_LIFETIME_MS);
		db.update(table.session).set({ expiresAt }).where(eq(table.session.id, id)).run();
		fresh = true;
	}
	return { session: { id, userId: row.userId, expiresAt }, user, fresh };
}

export function invalidateSession(sessionId: string): void {
	db.delete(table.session).where(eq(table.session.id, sessionId)).run();
}

export function invalidateUserSessions(userId: string, exceptSessionId?: string): number {
	const rows = db.select({ id: table.session.id }).from(table.session).where(eq(table.session.userId, userId)).all();
	let removed = 0;
	for (const r of rows) {
		if (r.id === exceptSessionId) continue;
		db.delete(table.session).where(eq(table.session.id, r.id)).run();
		removed++;
	}
	return removed;
}

export function listSessions(userId: string) {
	return db
		.select({
			id: table.session.id,
			expiresAt: table.session.expiresAt,
			createdAt: table.session.createdAt,
			userAgent: table.session.userAgent,
			ipAddress: table.session.ipAddress
		})
		.from(table.session)
		.where(eq(table.session.userId, userId))
		.all();
}

export function setSessionTokenCookie(event: RequestEvent, token: string, expiresAt: Date): void {
	event.cookies.set(SESSION_COOKIE, token, {
		expires: expiresAt,
		path: '/',
		httpOnly: true,
		sameSite: 'lax',
		secure: event.url.protocol === 'https:'
	});
}

export function deleteSessionTokenCookie(event: RequestEvent): void {
	event.cookies.delete(SESSION_COOKIE, { path: '/' });
}

/** A bearer token issued to a person or a robotic telescope. */
export interface TokenPrincipal {
	tokenId: string;
	user: SessionUser | null;
	telescopeId: string | null;
}

export function validateApiToken(secret: string, now = new Date()): TokenPrincipal | null {
	const row = db
		.select()
		.from(table.apiToken)
		.where(and(eq(table.apiToken.tokenHash, hashToken(secret)), isNull(table.apiToken.revokedAt)))
		.get();
	if (!row) return null;
	let user: SessionUser | null = null;
	if (row.userId) {
		user = loadSessionUser(row.userId);
		if (!user) return null;
	}
	db.update(table.apiToken).set({ lastUsedAt: now }).where(eq(table.apiToken.id, row.id)).run();
	return { tokenId: row.id, user, telescopeId: row.telescopeId };
}
