/**
 * A person's phone number for pages and the channels each kind of page goes by. A number is used
 * only once verified: a six-digit code is texted to it and typed back on the account page. A
 * duty scientist's duty pages go by at least two channels (checked here when they choose, and
 * again by `sendChannels` when a page goes out).
 */
import { createHash, randomInt } from 'node:crypto';
import { and, eq, isNotNull } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { DomainError } from '../platform/errors';
import { sendText } from '../platform/phone';
import { PHONE_CODE_LIFETIME_MIN, PHONE_CODE_MAX_TRIES, PHONE_CODE_RESEND_S } from '../../limits.ts';
import { KIND_INFO, NOTIFICATION_KINDS, type NotificationKind } from '../../notifications.ts';
import { channelProblems, sendChannels, toE164, E164_HELP, type Channel, type ChannelChoices } from '../../page-channels.ts';

export class PhoneError extends DomainError {
	constructor(message: string, fields: Record<string, string> = {}, status = 422) {
		super(status, 'invalid', message, fields);
	}
}

/** The kinds a person chooses channels for: the pages (duty pages and stand-downs). */
export const PAGE_KINDS = NOTIFICATION_KINDS.filter((k) => KIND_INFO[k].page);

export interface PhoneSettings {
	number: string | null;
	verifiedAt: Date | null;
	pendingNumber: string | null;
	channels: ChannelChoices;
}

const sha256 = (s: string) => createHash('sha256').update(s).digest('hex');

function row(userId: string): table.PhoneContact | undefined {
	return db.select().from(table.phoneContact).where(eq(table.phoneContact.userId, userId)).get();
}

export function phoneSettingsOf(userId: string): PhoneSettings {
	const r = row(userId);
	return { number: r?.number ?? null, verifiedAt: r?.verifiedAt ?? null, pendingNumber: r?.pendingNumber ?? null, channels: r?.channels ?? {} };
}

function upsert(userId: string, values: Partial<Omit<table.PhoneContact, 'userId'>>, now: Date): void {
	db.insert(table.phoneContact)
		.values({ userId, channels: {}, ...values, updatedAt: now })
		.onConflictDoUpdate({ target: table.phoneContact.userId, set: { ...values, updatedAt: now } })
		.run();
}

/**
 * Start verifying a number: checks it is E.164, keeps it as pending with a fresh code and texts
 * the code to it. The verified number, if any, stays in use until the new one is verified.
 */
export async function requestVerification(userId: string, typed: string, now = new Date()): Promise<string> {
	const number = toE164(typed);
	if (!number) throw new PhoneError(`“${typed.slice(0, 40)}” is not a phone number we can text. ${E164_HELP}`, { phone: E164_HELP });
	// One code a minute: the form cannot be used to flood a number with texts.
	const last = row(userId);
	if (last?.codeExpiresAt && last.codeExpiresAt.getTime() - PHONE_CODE_LIFETIME_MIN * 60_000 + PHONE_CODE_RESEND_S * 1000 > now.getTime())
		throw new PhoneError(`A code was texted less than ${PHONE_CODE_RESEND_S} seconds ago: wait a moment before asking for another.`, { phone: 'Wait a moment before asking again.' }, 429);
	const code = String(randomInt(0, 1_000_000)).padStart(6, '0');
	upsert(userId, { pendingNumber: number, codeHash: sha256(`${userId}:${code}`), codeExpiresAt: new Date(now.getTime() + PHONE_CODE_LIFETIME_MIN * 60_000), codeTries: 0 }, now);
	try {
		await sendText(number, `Strainline: your verification code is ${code}. It expires in ${PHONE_CODE_LIFETIME_MIN} minutes. If you did not ask for it, ignore this message.`);
	} catch (e) {
		throw new PhoneError(`The code could not be texted to ${number}: ${(e as Error).message}. Check the number and try again.`, { phone: 'The text could not be sent.' }, 502);
	}
	return number;
}

/** Check a typed code against the pending number; on success the number becomes the verified one. */
export function verifyCode(userId: string, typed: string, now = new Date()): string {
	const r = row(userId);
	if (!r?.pendingNumber || !r.codeHash || !r.codeExpiresAt) throw new PhoneError('There is no number waiting for a code: add your number first.', { code: 'Add your number first.' }, 409);
	if (r.codeExpiresAt.getTime() <= now.getTime()) throw new PhoneError('This code has expired: ask for a new one.', { code: 'The code has expired.' }, 410);
	if (r.codeTries >= PHONE_CODE_MAX_TRIES) throw new PhoneError('Too many wrong codes: ask for a new one.', { code: 'Too many tries.' }, 429);
	const code = typed.replace(/\s/g, '');
	if (!/^\d{6}$/.test(code) || sha256(`${userId}:${code}`) !== r.codeHash) {
		db.update(table.phoneContact).set({ codeTries: r.codeTries + 1 }).where(eq(table.phoneContact.userId, userId)).run();
		throw new PhoneError('That code does not match the one we texted. Type the six digits of the latest message.', { code: 'The code does not match.' });
	}
	upsert(userId, { number: r.pendingNumber, verifiedAt: now, pendingNumber: null, codeHash: null, codeExpiresAt: null, codeTries: 0 }, now);
	return r.pendingNumber;
}

/**
 * Save the channels for the page kinds. Refuses an empty choice, text or voice without a
 * verified number, and fewer than two channels for duty pages when the person is a duty scientist.
 */
export function saveChannels(user: { id: string; roles: readonly string[] }, choices: ChannelChoices, now = new Date()): void {
	const unknown = Object.keys(choices).filter((k) => !(PAGE_KINDS as readonly string[]).includes(k));
	if (unknown.length) throw new PhoneError('Only pages can go by text or voice.', Object.fromEntries(unknown.map((k) => [`channel.${k}`, 'Not a kind of page.'])));
	const problems = channelProblems(choices, { verifiedPhone: !!phoneSettingsOf(user.id).number, dutyScientist: user.roles.includes('duty') });
	const fields = Object.fromEntries(Object.entries(problems).map(([k, v]) => [`channel.${k}`, v]));
	if (Object.keys(fields).length) throw new PhoneError(Object.values(fields)[0], fields);
	upsert(user.id, { channels: choices }, now);
}

export interface Reach {
	channels: Channel[];
	/** The verified number, when there is one. */
	number: string | null;
}

/** How a page of `kind` reaches this person now (the duty rule of two channels applied). */
export function reachFor(userId: string, kind: NotificationKind): Reach {
	const s = phoneSettingsOf(userId);
	return { channels: sendChannels(s.channels, kind, { verifiedPhone: !!s.number }), number: s.number };
}

/** People whose verified number is `number` (a number may be shared, e.g. an observatory's duty phone). */
export function peopleWithNumber(number: string): string[] {
	return db
		.select({ userId: table.phoneContact.userId })
		.from(table.phoneContact)
		.where(and(eq(table.phoneContact.number, number), isNotNull(table.phoneContact.verifiedAt)))
		.all()
		.map((r) => r.userId);
}
