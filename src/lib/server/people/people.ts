import { and, eq, gt, isNull, asc, inArray } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import type { Role } from '../platform/db/schema';
import { config } from '../platform/config';
import { hashPassword, hashToken, randomId, randomToken, invalidateUserSessions, verifyPassword } from './auth';
import { sendMail } from '../platform/mail';
import { record, type Actor } from '../platform/realtime';
import { InputError } from '../platform/errors';
import { attemptsSince, recordAttempt, secondsUntilWindowFrees } from './attempts';

export class PeopleError extends InputError {}

export function findUserByEmail(email: string) {
	return db.select().from(table.user).where(eq(table.user.email, email.trim().toLowerCase())).get();
}

export function listUsers() {
	const users = db
		.select({
			id: table.user.id,
			email: table.user.email,
			name: table.user.name,
			disabledAt: table.user.disabledAt,
			isDemo: table.user.isDemo,
			createdAt: table.user.createdAt
		})
		.from(table.user)
		.orderBy(asc(table.user.name))
		.all();
	const roles = db.select().from(table.userRole).all();
	const members = db
		.select({ userId: table.teamMember.userId, teamId: table.teamMember.teamId, teamName: table.team.name })
		.from(table.teamMember)
		.innerJoin(table.team, eq(table.team.id, table.teamMember.teamId))
		.all();
	return users.map((u) => ({
		...u,
		roles: roles.filter((r) => r.userId === u.id).map((r) => r.role),
		teams: members.filter((m) => m.userId === u.id).map((m) => ({ id: m.teamId, name: m.teamName }))
	}));
}

/** Create a person directly (seeds and tests); people otherwise arrive by invitation. */
export async function createUser(input: {
	email: string;
	name: string;
	password: string;
	roles: Role[];
	teamIds?: string[];
	isDemo?: boolean;
}): Promise<string> {
	const id = randomId();
	const passwordHash = await hashPassword(input.password);
	db.transaction((tx) => {
		tx.insert(table.user)
			.values({ id, email: input.email.toLowerCase(), name: input.name, passwordHash, isDemo: input.isDemo ?? false })
			.run();
		for (const role of new Set(input.roles)) tx.insert(table.userRole).values({ userId: id, role }).run();
		for (const teamId of new Set(input.teamIds ?? [])) tx.insert(table.teamMember).values({ teamId, userId: id }).run();
	});
	return id;
}

export function invitationLink(token: string): string {
	return `${config.publicUrl}/invitation/${token}`;
}

export function resetLink(token: string): string {
	return `${config.publicUrl}/reset/${token}`;
}

/**
 * Invite a person by e-mail. Writes the invitation, then sends the link; the token is only in
 * the e-mail (the database holds its hash).
 */
export async function invite(
	actor: Actor,
	input: { email: string; roles: Role[]; teamIds: string[] },
	now = new Date()
): Promise<{ invitationId: string; token: string }> {
	if (findUserByEmail(input.email)) throw new PeopleError('Someone with this e-mail already has an account.', 'email');
	if (input.roles.includes('observer') && input.teamIds.length === 0)
		throw new PeopleError('An observer belongs to at least one telescope team.', 'teamIds');
	if (input.teamIds.length) {
		const found = db.select({ id: table.team.id }).from(table.team).where(inArray(table.team.id, input.teamIds)).all();
		if (found.length !== new Set(input.teamIds).size) throw new PeopleError('Unknown team.', 'teamIds');
	}
	const token = randomToken(24);
	const invitationId = randomId();
	db.insert(table.invitation)
		.values({
			id: invitationId,
			email: input.email,
			roles: [...new Set(input.roles)],
			teamIds: [...new Set(input.teamIds)],
			tokenHash: hashToken(token),
			invitedBy: actor.userId,
			expiresAt: new Date(now.getTime() + config.invitationLifetimeMs)
		})
		.run();
	const hours = Math.round(config.invitationLifetimeMs / 3600_000);
	await sendMail({
		to: input.email,
		subject: 'You are invited to Strainline',
		text: [
			`${actor.label} invited you to Strainline, the follow-up board for gravitational-wave mergers.`,
			'',
			'Set your name and password here:',
			invitationLink(token),
			'',
			`The link works once and expires in ${hours} hours.`
		].join('\n')
	});
	record(actor, 'person.invited', 'board', { invitationId, email: input.email, roles: input.roles });
	return { invitationId, token };
}

export function listInvitations(now = new Date()) {
	return db
		.select({
			id: table.invitation.id,
			email: table.invitation.email,
			roles: table.invitation.roles,
			expiresAt: table.invitation.expiresAt,
			usedAt: table.invitation.usedAt,
			revokedAt: table.invitation.revokedAt,
			createdAt: table.invitation.createdAt
		})
		.from(table.invitation)
		.orderBy(asc(table.invitation.createdAt))
		.all()
		.map((i) => ({ ...i, state: i.usedAt ? 'accepted' : i.revokedAt ? 'withdrawn' : i.expiresAt < now ? 'expired' : 'pending' }));
}

export function revokeInvitation(actor: Actor, invitationId: string, now = new Date()) {
	const res = db
		.update(table.invitation)
		.set({ revokedAt: now })
		.where(and(eq(table.invitation.id, invitationId), isNull(table.invitation.usedAt), isNull(table.invitation.revokedAt)))
		.run();
	if (res.changes) record(actor, 'person.invitation-withdrawn', 'board', { invitationId });
	return res.changes > 0;
}

/** A usable invitation for the token, or null (unknown, used, withdrawn or expired). */
export function findOpenInvitation(token: string, now = new Date()) {
	return (
		db
			.select()
			.from(table.invitation)
			.where(
				and(
					eq(table.invitation.tokenHash, hashToken(token)),
					isNull(table.invitation.usedAt),
					isNull(table.invitation.revokedAt),
					gt(table.invitation.expiresAt, now)
				)
			)
			.get() ?? null
	);
}

/** Accept an invitation: creates the person with the invited roles and teams, single use. */
export async function acceptInvitation(token: string, input: { name: string; password: string }, now = new Date()) {
	const passwordHash = await hashPassword(input.password);
	const userId = randomId();
	const accepted = db.transaction((tx) => {
		const inv = tx
			.select()
			.from(table.invitation)
			.where(
				and(
					eq(table.invitation.tokenHash, hashToken(token)),
					isNull(table.invitation.usedAt),
					isNull(table.invitation.revokedAt),
					gt(table.invitation.expiresAt, now)
				)
			)
			.get();
		if (!inv) return null;
		const taken = tx.select({ id: table.user.id }).from(table.user).where(eq(table.user.email, inv.email)).get();
		if (taken) return null;
		const used = tx
			.update(table.invitation)
			.set({ usedAt: now })
			.where(and(eq(table.invitation.id, inv.id), isNull(table.invitation.usedAt)))
			.run();
		if (used.changes !== 1) return null;
		tx.insert(table.user).values({ id: userId, email: inv.email, name: input.name, passwordHash }).run();
		for (const role of inv.roles) tx.insert(table.userRole).values({ userId, role }).run();
		for (const teamId of inv.teamIds) tx.insert(table.teamMember).values({ teamId, userId }).run();
		return inv;
	});
	if (!accepted) throw new PeopleError('This invitation link is no longer valid. Ask for a new one.', undefined, 410, 'gone');
	record({ userId, label: input.name }, 'person.joined', 'board', { userId, name: input.name, roles: accepted.roles });
	return { userId, email: accepted.email };
}

export type ResetRequestResult = { ok: true } | { ok: false; reason: 'address' | 'client'; retryAfterS: number };

/**
 * Start a password reset. Behaves the same whether or not the address is known, so the page
 * cannot be used to find out who has an account: the same limits count both, and the mail is
 * sent after the answer (errors go to the log), so both answer in the same time.
 * Limited per address asked for and, when `clientAddress` is given, per client (config.resetLimit).
 */
export async function requestPasswordReset(email: string, now = new Date(), clientAddress: string | null = null): Promise<ResetRequestResult> {
	const { perAddress, perClient, windowMs } = config.resetLimit;
	const since = new Date(now.getTime() - windowMs);
	const addressKey = `reset-email:${email.trim().toLowerCase()}`;
	const clientKey = clientAddress ? `reset-ip:${clientAddress}` : null;
	if (clientKey) {
		const byClient = attemptsSince(clientKey, since);
		if (byClient.count >= perClient) return { ok: false, reason: 'client', retryAfterS: secondsUntilWindowFrees(byClient.oldest, windowMs, now) };
	}
	const byAddress = attemptsSince(addressKey, since);
	if (byAddress.count >= perAddress) return { ok: false, reason: 'address', retryAfterS: secondsUntilWindowFrees(byAddress.oldest, windowMs, now) };
	recordAttempt(clientKey ? [addressKey, clientKey] : [addressKey], true, now);

	const found = findUserByEmail(email);
	if (!found || found.disabledAt) return { ok: true };
	const token = randomToken(24);
	db.insert(table.passwordReset)
		.values({
			id: randomId(),
			userId: found.id,
			tokenHash: hashToken(token),
			expiresAt: new Date(now.getTime() + config.resetLifetimeMs)
		})
		.run();
	const minutes = Math.round(config.resetLifetimeMs / 60_000);
	const mail = {
		to: found.email,
		subject: 'Reset your Strainline password',
		text: [
			'Someone asked to reset the password of your Strainline account.',
			'',
			'Choose a new password here:',
			resetLink(token),
			'',
			`The link works once and expires in ${minutes} minutes. If it was not you, ignore this message.`
		].join('\n')
	};
	setImmediate(() => {
		sendMail(mail).catch((e: unknown) => console.error(`[mail] the reset link for ${found.email} could not be sent:`, e));
	});
	return { ok: true };
}

/** Void every open reset link of a person (after a reset or a password change). */
function voidOpenResets(tx: Pick<typeof db, 'update'>, userId: string, now: Date) {
	tx.update(table.passwordReset)
		.set({ usedAt: now })
		.where(and(eq(table.passwordReset.userId, userId), isNull(table.passwordReset.usedAt)))
		.run();
}

export function findOpenReset(token: string, now = new Date()) {
	return (
		db
			.select()
			.from(table.passwordReset)
			.where(
				and(
					eq(table.passwordReset.tokenHash, hashToken(token)),
					isNull(table.passwordReset.usedAt),
					gt(table.passwordReset.expiresAt, now)
				)
			)
			.get() ?? null
	);
}

/** Use a reset token (once): sets the password and signs the person out everywhere. */
export async function resetPassword(token: string, password: string, now = new Date()): Promise<string> {
	const passwordHash = await hashPassword(password);
	const userId = db.transaction((tx) => {
		const reset = tx
			.select()
			.from(table.passwordReset)
			.where(
				and(
					eq(table.passwordReset.tokenHash, hashToken(token)),
					isNull(table.passwordReset.usedAt),
					gt(table.passwordReset.expiresAt, now)
				)
			)
			.get();
		if (!reset) return null;
		const used = tx
			.update(table.passwordReset)
			.set({ usedAt: now })
			.where(and(eq(table.passwordReset.id, reset.id), isNull(table.passwordReset.usedAt)))
			.run();
		if (used.changes !== 1) return null;
		tx.update(table.user).set({ passwordHash }).where(eq(table.user.id, reset.userId)).run();
		voidOpenResets(tx, reset.userId, now);
		return reset.userId;
	});
	if (!userId) throw new PeopleError('This reset link is no longer valid. Ask for a new one.', undefined, 410, 'gone');
	invalidateUserSessions(userId);
	return userId;
}

export async function changePassword(userId: string, current: string, next: string, keepSessionId: string) {
	const row = db.select().from(table.user).where(eq(table.user.id, userId)).get();
	if (!row || !(await verifyPassword(row.passwordHash, current)))
		throw new PeopleError('The current password is not right.', 'currentPassword');
	const passwordHash = await hashPassword(next);
	db.transaction((tx) => {
		tx.update(table.user).set({ passwordHash }).where(eq(table.user.id, userId)).run();
		voidOpenResets(tx, userId, new Date());
	});
	invalidateUserSessions(userId, keepSessionId);
}

export function rolesOf(userId: string): Role[] {
	return db.select({ role: table.userRole.role }).from(table.userRole).where(eq(table.userRole.userId, userId)).all().map((r) => r.role);
}

export function setRoles(actor: Actor, userId: string, roles: Role[]) {
	if (actor.userId === userId && !roles.includes('admin'))
		throw new PeopleError('You cannot remove your own administrator role.', 'roles');
	db.transaction((tx) => {
		tx.delete(table.userRole).where(eq(table.userRole.userId, userId)).run();
		for (const role of new Set(roles)) tx.insert(table.userRole).values({ userId, role }).run();
	});
	record(actor, 'person.roles-changed', 'board', { userId, roles });
}

export function setDisabled(actor: Actor, userId: string, disabled: boolean, now = new Date()) {
	if (actor.userId === userId) throw new PeopleError('You cannot disable your own account.');
	db.update(table.user).set({ disabledAt: disabled ? now : null }).where(eq(table.user.id, userId)).run();
	if (disabled) invalidateUserSessions(userId);
	record(actor, disabled ? 'person.disabled' : 'person.enabled', 'board', { userId });
}
