import { beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import * as auth from './auth';
import * as table from '../platform/db/schema';
import { createUser } from './people';
import type { DB } from '../platform/db';

let db: DB;
let userId: string;

beforeEach(async () => {
	db = createTestDatabase();
	userId = await createUser({ email: 'ana@example.test', name: 'Ana', password: 'long-enough-pw', roles: ['observer'] });
});

describe('password hashing (Argon2id)', () => {
	it('verifies the right password and refuses a wrong one', async () => {
		const h = await auth.hashPassword('correct horse battery');
		expect(h.startsWith('$argon2id$')).toBe(true);
		expect(h).toContain('m=19456,t=2,p=1');
		expect(await auth.verifyPassword(h, 'correct horse battery')).toBe(true);
		expect(await auth.verifyPassword(h, 'correct horse batterY')).toBe(false);
	});
	it('salts: the same password hashes differently', async () => {
		expect(await auth.hashPassword('same-password')).not.toBe(await auth.hashPassword('same-password'));
	});
	it('treats a malformed stored hash as a failed match, not a crash', async () => {
		expect(await auth.verifyPassword('not-a-hash', 'x')).toBe(false);
	});
});

describe('sessions', () => {
	it('stores only the SHA-256 of the token and validates it', () => {
		const token = auth.generateSessionToken();
		const t0 = new Date('2026-01-01T00:00:00Z');
		const s = auth.createSession(token, userId, {}, t0);
		expect(s.id).toMatch(/^[0-9a-f]{64}$/);
		expect(s.id).not.toContain(token);
		const row = db.select().from(table.session).where(eq(table.session.id, s.id)).get();
		expect(row?.id).toBe(auth.hashToken(token));
		const v = auth.validateSessionToken(token, new Date(t0.getTime() + 1000));
		expect(v.user?.email).toBe('ana@example.test');
		expect(v.user?.roles).toEqual(['observer']);
		expect(v.fresh).toBe(false);
	});

	it('refuses an unknown token', () => {
		expect(auth.validateSessionToken('nonsense').session).toBeNull();
	});

	it('expires after 30 days and deletes the row', () => {
		const token = auth.generateSessionToken();
		const t0 = new Date('2026-01-01T00:00:00Z');
		auth.createSession(token, userId, {}, t0);
		const later = new Date(t0.getTime() + auth.SESSION_LIFETIME_MS + 1);
		expect(auth.validateSessionToken(token, later).session).toBeNull();
		expect(db.select().from(table.session).all()).toHaveLength(0);
	});

	it('renews (sliding expiry) once less than 15 days remain', () => {
		const token = auth.generateSessionToken();
		const t0 = new Date('2026-01-01T00:00:00Z');
		auth.createSession(token, userId, {}, t0);
		const day16 = new Date(t0.getTime() + 16 * 86400_000);
		const v = auth.validateSessionToken(token, day16);
		expect(v.fresh).toBe(true);
		expect(v.session!.expiresAt.getTime()).toBe(day16.getTime() + auth.SESSION_LIFETIME_MS);
		// Still valid past the original expiry because it was renewed.
		const day40 = new Date(t0.getTime() + 40 * 86400_000);
		expect(auth.validateSessionToken(token, day40).session).not.toBeNull();
	});

	it('invalidates one session, or all of a person except the current one', () => {
		const a = auth.generateSessionToken();
		const b = auth.generateSessionToken();
		const c = auth.generateSessionToken();
		const sa = auth.createSession(a, userId);
		auth.createSession(b, userId);
		auth.createSession(c, userId);
		auth.invalidateSession(auth.hashToken(b));
		expect(auth.validateSessionToken(b).session).toBeNull();
		expect(auth.invalidateUserSessions(userId, sa.id)).toBe(1);
		expect(auth.validateSessionToken(c).session).toBeNull();
		expect(auth.validateSessionToken(a).session).not.toBeNull();
	});

	it('refuses the session of a disabled person', () => {
		const token = auth.generateSessionToken();
		auth.createSession(token, userId);
		db.update(table.user).set({ disabledAt: new Date() }).where(eq(table.user.id, userId)).run();
		expect(auth.validateSessionToken(token).session).toBeNull();
	});
});
