import { afterAll, beforeEach, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../platform/testing/database';
import * as people from './people';
import * as auth from './auth';
import { receivedMail, stopFakeSmtp } from '../platform/fake-smtp';
import { config } from '../platform/config';
import { createTeam } from './teams';
import { SYSTEM } from '../platform/realtime';

const admin = { userId: null, label: 'Test Admin' };

/** The link in the newest message to `to`, read from what the fake SMTP server received. */
async function linkSentTo(to: string, path: string): Promise<string> {
	for (let i = 0; i < 50; i++) {
		const mail = receivedMail().find((m) => m.to.includes(to));
		if (mail) {
			const m = mail.text.match(new RegExp(`https?://\\S+/${path}/(\\S+)`));
			if (m) return m[1];
		}
		await new Promise((r) => setTimeout(r, 20));
	}
	throw new Error(`no mail to ${to}`);
}

beforeEach(() => {
	createTestDatabase();
});
afterAll(() => stopFakeSmtp());

describe('invitations', () => {
	it('sends a real e-mail whose link creates the account once', async () => {
		const teamId = createTeam(SYSTEM, { name: 'Team A', region: 'Somewhere', description: '' });
		const { token } = await people.invite(admin, { email: 'new@example.test', roles: ['observer'], teamIds: [teamId] });
		const mailed = await linkSentTo('new@example.test', 'invitation');
		expect(mailed).toBe(token);
		const mail = receivedMail().find((m) => m.to.includes('new@example.test'))!;
		expect(mail.subject).toMatch(/invited/i);
		expect(mail.text).toContain('Test Admin');

		const { userId } = await people.acceptInvitation(mailed, { name: 'New Person', password: 'a-good-password' });
		const user = auth.loadSessionUser(userId)!;
		expect(user.roles).toEqual(['observer']);
		expect(user.teamIds).toEqual([teamId]);
		await expect(people.acceptInvitation(mailed, { name: 'Again', password: 'a-good-password' })).rejects.toThrow(/no longer valid/);
		expect(people.findOpenInvitation(mailed)).toBeNull();
	});

	it('expires', async () => {
		const t0 = new Date('2026-03-01T00:00:00Z');
		const { token } = await people.invite(admin, { email: 'late@example.test', roles: ['viewer'], teamIds: [] }, t0);
		const after = new Date(t0.getTime() + config.invitationLifetimeMs + 1);
		expect(people.findOpenInvitation(token, new Date(t0.getTime() + 1000))).not.toBeNull();
		expect(people.findOpenInvitation(token, after)).toBeNull();
		await expect(people.acceptInvitation(token, { name: 'Late', password: 'a-good-password' }, after)).rejects.toThrow(/no longer valid/);
	});

	it('can be withdrawn, and refuses unknown tokens', async () => {
		const { token, invitationId } = await people.invite(admin, { email: 'w@example.test', roles: ['viewer'], teamIds: [] });
		expect(people.revokeInvitation(admin, invitationId)).toBe(true);
		await expect(people.acceptInvitation(token, { name: 'W', password: 'a-good-password' })).rejects.toThrow();
		await expect(people.acceptInvitation('made-up', { name: 'X', password: 'a-good-password' })).rejects.toThrow();
	});

	it('refuses an observer without a team and an address already taken', async () => {
		await expect(people.invite(admin, { email: 'o@example.test', roles: ['observer'], teamIds: [] })).rejects.toMatchObject({ field: 'teamIds' });
		await people.createUser({ email: 'taken@example.test', name: 'T', password: 'a-good-password', roles: ['viewer'] });
		await expect(people.invite(admin, { email: 'taken@example.test', roles: ['viewer'], teamIds: [] })).rejects.toMatchObject({ field: 'email' });
	});
});

describe('password reset', () => {
	it('mails a single-use link that sets the password and signs out everywhere', async () => {
		const userId = await people.createUser({ email: 'r@example.test', name: 'R', password: 'old-password-1', roles: ['viewer'] });
		const session = auth.generateSessionToken();
		auth.createSession(session, userId);
		await people.requestPasswordReset('R@Example.test');
		const token = await linkSentTo('r@example.test', 'reset');
		await people.resetPassword(token, 'new-password-2');
		expect(auth.validateSessionToken(session).session).toBeNull();
		await expect(people.resetPassword(token, 'third-password-3')).rejects.toThrow(/no longer valid/);
		const { signIn } = await import('./sign-in');
		expect((await signIn('r@example.test', 'new-password-2', '127.0.0.9')).ok).toBe(true);
		expect((await signIn('r@example.test', 'old-password-1', '127.0.0.9')).ok).toBe(false);
	});

	it('expires', async () => {
		await people.createUser({ email: 'e@example.test', name: 'E', password: 'old-password-1', roles: ['viewer'] });
		const t0 = new Date('2026-03-01T00:00:00Z');
		await people.requestPasswordReset('e@example.test', t0);
		const token = await linkSentTo('e@example.test', 'reset');
		const after = new Date(t0.getTime() + config.resetLifetimeMs + 1);
		await expect(people.resetPassword(token, 'new-password-2', after)).rejects.toThrow(/no longer valid/);
	});

	it('says nothing about unknown addresses and sends them nothing', async () => {
		const before = receivedMail().length;
		await people.requestPasswordReset('nobody@example.test');
		await new Promise((r) => setTimeout(r, 100));
		expect(receivedMail().length).toBe(before);
	});
});

describe('password reset links and limits', () => {
	it("using one reset link voids the person's other open links", async () => {
		await people.createUser({ email: 'two@example.test', name: 'Two', password: 'old-password-1', roles: ['viewer'] });
		await people.requestPasswordReset('two@example.test');
		const first = await linkSentTo('two@example.test', 'reset');
		await people.requestPasswordReset('two@example.test');
		let second = first;
		for (let i = 0; i < 50 && second === first; i++) {
			second = await linkSentTo('two@example.test', 'reset');
			if (second === first) await new Promise((r) => setTimeout(r, 20));
		}
		expect(second).not.toBe(first);
		expect(people.findOpenReset(first)).not.toBeNull();
		await people.resetPassword(second, 'new-password-2');
		expect(people.findOpenReset(first)).toBeNull();
		await expect(people.resetPassword(first, 'third-password-3')).rejects.toThrow(/no longer valid/);
	});

	it('changing the password voids open reset links', async () => {
		const userId = await people.createUser({ email: 'chg@example.test', name: 'Chg', password: 'old-password-1', roles: ['viewer'] });
		await people.requestPasswordReset('chg@example.test');
		const token = await linkSentTo('chg@example.test', 'reset');
		const session = auth.generateSessionToken();
		const { id: sessionId } = auth.createSession(session, userId);
		await people.changePassword(userId, 'old-password-1', 'new-password-2', sessionId);
		expect(people.findOpenReset(token)).toBeNull();
	});

	it('answers before any mail is sent, known address or not (the mail goes out afterwards)', async () => {
		await people.createUser({ email: 'quick@example.test', name: 'Q', password: 'old-password-1', roles: ['viewer'] });
		const before = receivedMail().length;
		await people.requestPasswordReset('quick@example.test');
		expect(receivedMail().length).toBe(before);
		await people.requestPasswordReset('nobody-here@example.test');
		expect(receivedMail().length).toBe(before);
		expect(await linkSentTo('quick@example.test', 'reset')).toMatch(/^[a-z0-9]+$/);
	});

	it('limits requests per address (known or not) and per client', async () => {
		const { perAddress, perClient, windowMs } = config.resetLimit;
		const t0 = new Date('2026-04-02T00:00:00Z');
		for (let i = 0; i < perAddress; i++) expect(await people.requestPasswordReset('nobody@example.test', t0, `10.1.0.${i}`)).toEqual({ ok: true });
		expect(await people.requestPasswordReset('Nobody@example.test', t0, '10.1.9.9')).toMatchObject({ ok: false, reason: 'address' });
		const later = new Date(t0.getTime() + windowMs + 1000);
		expect(await people.requestPasswordReset('nobody@example.test', later, '10.1.9.9')).toEqual({ ok: true });

		for (let i = 0; i < perClient; i++) expect(await people.requestPasswordReset(`n${i}@example.test`, t0, '10.2.0.1')).toEqual({ ok: true });
		const limited = await people.requestPasswordReset('fresh@example.test', t0, '10.2.0.1');
		expect(limited).toMatchObject({ ok: false, reason: 'client' });
		expect(limited.ok === false && limited.retryAfterS).toBeGreaterThan(0);
		expect(await people.requestPasswordReset('fresh@example.test', t0, '10.2.0.2')).toEqual({ ok: true });
	});
});

describe('sign-in rate limit', () => {
	it('locks an address after too many failures within the window', async () => {
		const { signIn } = await import('./sign-in');
		await people.createUser({ email: 'rl@example.test', name: 'RL', password: 'right-password', roles: ['viewer'] });
		const t0 = new Date('2026-04-01T00:00:00Z');
		for (let i = 0; i < config.signInLimit.attempts; i++) {
			expect((await signIn('rl@example.test', 'wrong', `10.0.0.${i}`, t0)).ok).toBe(false);
		}
		const locked = await signIn('rl@example.test', 'right-password', '10.0.1.1', t0);
		expect(locked).toMatchObject({ ok: false, reason: 'limited' });
		const later = new Date(t0.getTime() + config.signInLimit.windowMs + 1000);
		expect((await signIn('rl@example.test', 'right-password', '10.0.1.1', later)).ok).toBe(true);
	});

	it('eight wrong passwords from anywhere do not lock the owner out: a short wait, then the right password works', async () => {
		const { signIn } = await import('./sign-in');
		await people.createUser({ email: 'owner@example.test', name: 'Owner', password: 'right-password', roles: ['viewer'] });
		const t0 = new Date('2026-04-03T00:00:00Z');
		for (let i = 0; i < 8; i++) expect((await signIn('owner@example.test', 'wrong', `10.3.0.${i}`, t0)).ok).toBe(false);
		const oneMinuteLater = new Date(t0.getTime() + 60_000);
		expect(await signIn('owner@example.test', 'right-password', '10.3.1.1', oneMinuteLater)).toMatchObject({ ok: true });
	});

	it('limits a client with many failures, whichever accounts it tries, and not the others', async () => {
		const { signIn } = await import('./sign-in');
		await people.createUser({ email: 'c1@example.test', name: 'C1', password: 'right-password', roles: ['viewer'] });
		await people.createUser({ email: 'c2@example.test', name: 'C2', password: 'right-password', roles: ['viewer'] });
		const t0 = new Date('2026-04-04T00:00:00Z');
		for (let i = 0; i < config.signInLimit.attempts; i++) {
			expect((await signIn(`someone${i}@example.test`, 'wrong', '10.4.0.1', new Date(t0.getTime() + i))).ok).toBe(false);
		}
		const limited = await signIn('c1@example.test', 'right-password', '10.4.0.1', new Date(t0.getTime() + 1000));
		expect(limited).toMatchObject({ ok: false, reason: 'limited' });
		expect(limited.ok === false && limited.retryAfterS).toBeGreaterThan(0);
		expect(await signIn('c1@example.test', 'right-password', '10.4.0.2', new Date(t0.getTime() + 1000))).toMatchObject({ ok: true });
		expect(await signIn('c2@example.test', 'right-password', '10.4.0.3', new Date(t0.getTime() + 1000))).toMatchObject({ ok: true });
	});

	it('makes each further failure on one account wait twice as long, and a success starts over', async () => {
		const { signIn } = await import('./sign-in');
		await people.createUser({ email: 'grow@example.test', name: 'Grow', password: 'right-password', roles: ['viewer'] });
		const { accountFreeFailures } = config.signInLimit;
		let t = new Date('2026-04-05T00:00:00Z').getTime();
		let ip = 0;
		for (let i = 0; i < accountFreeFailures; i++) expect(await signIn('grow@example.test', 'wrong', `10.5.0.${ip++}`, new Date(t))).toMatchObject({ reason: 'invalid' });
		const waits: number[] = [];
		for (let i = 0; i < 4; i++) {
			const refused = await signIn('grow@example.test', 'right-password', `10.5.0.${ip++}`, new Date(t));
			expect(refused).toMatchObject({ ok: false, reason: 'limited' });
			const wait = refused.ok ? 0 : refused.retryAfterS!;
			waits.push(wait);
			t += wait * 1000;
			expect(await signIn('grow@example.test', 'wrong', `10.5.0.${ip++}`, new Date(t))).toMatchObject({ reason: 'invalid' });
		}
		expect(waits).toEqual([1, 2, 4, 8]);
		t += 16_000;
		expect(await signIn('grow@example.test', 'right-password', `10.5.0.${ip++}`, new Date(t))).toMatchObject({ ok: true });
		expect(await signIn('grow@example.test', 'wrong', `10.5.0.${ip++}`, new Date(t))).toMatchObject({ reason: 'invalid' });
		expect(await signIn('grow@example.test', 'wrong', `10.5.0.${ip++}`, new Date(t))).toMatchObject({ reason: 'invalid' });
	});
});
