import { asc, eq, and, isNull } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { hashToken, randomId, randomToken, type SessionUser } from './auth';
import { record, type Actor } from '../platform/realtime';
import { InputError } from '../platform/errors';

export const TOKEN_PREFIX = 'stl_';

export class TokenError extends InputError {}

/** Issue a token for a person or a telescope. Returns the secret: shown once, stored hashed. */
export function issueToken(
	actor: Actor,
	input: { name: string; userId?: string | null; telescopeId?: string | null }
): { id: string; secret: string } {
	const userId = input.userId || null;
	const telescopeId = input.telescopeId || null;
	if ((userId === null) === (telescopeId === null)) throw new TokenError('Choose either a person or a telescope.', 'owner');
	if (userId && !db.select({ id: table.user.id }).from(table.user).where(eq(table.user.id, userId)).get())
		throw new TokenError('Unknown person.', 'owner');
	if (telescopeId && !db.select({ id: table.telescope.id }).from(table.telescope).where(eq(table.telescope.id, telescopeId)).get())
		throw new TokenError('Unknown telescope.', 'owner');
	const secret = TOKEN_PREFIX + randomToken(24);
	const id = randomId();
	db.insert(table.apiToken)
		.values({ id, name: input.name, tokenHash: hashToken(secret), prefix: secret.slice(0, 10), userId, telescopeId, createdBy: actor.userId })
		.run();
	record(actor, 'token.issued', 'board', { tokenId: id, name: input.name, userId, telescopeId });
	return { id, secret };
}

export function revokeToken(actor: Actor, id: string, now = new Date()): boolean {
	const res = db
		.update(table.apiToken)
		.set({ revokedAt: now })
		.where(and(eq(table.apiToken.id, id), isNull(table.apiToken.revokedAt)))
		.run();
	if (res.changes) record(actor, 'token.revoked', 'board', { tokenId: id });
	return res.changes > 0;
}

export function listTokens() {
	return db
		.select({
			id: table.apiToken.id,
			name: table.apiToken.name,
			prefix: table.apiToken.prefix,
			userName: table.user.name,
			telescopeName: table.telescope.name,
			createdAt: table.apiToken.createdAt,
			lastUsedAt: table.apiToken.lastUsedAt,
			revokedAt: table.apiToken.revokedAt
		})
		.from(table.apiToken)
		.leftJoin(table.user, eq(table.user.id, table.apiToken.userId))
		.leftJoin(table.telescope, eq(table.telescope.id, table.apiToken.telescopeId))
		.orderBy(asc(table.apiToken.createdAt))
		.all();
}

/** Who reports through the API: a person, or a robotic telescope by its own token (recorded by token id). */
export type ApiReporter = { user: SessionUser; telescopeId?: null; tokenId?: null } | { user: null; telescopeId: string; tokenId: string | null };

export function reporterOf(principal: { user: SessionUser | null; telescopeId?: string | null }, request: Request): ApiReporter {
	if (principal.user) return { user: principal.user };
	// The hook resolved the telescope; the token row is looked up again only to record who reported.
	const secret = (request.headers.get('authorization') ?? '').slice(7).trim();
	const token = db
		.select({ id: table.apiToken.id })
		.from(table.apiToken)
		.where(and(eq(table.apiToken.tokenHash, hashToken(secret)), isNull(table.apiToken.revokedAt)))
		.get();
	return { user: null, telescopeId: principal.telescopeId!, tokenId: token?.id ?? null };
}

