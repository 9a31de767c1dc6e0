/**
 * Acknowledging a page from the message itself, without signing in: by its one-time link (the
 * page shows a button; only the POST acknowledges, so a link scanner that opens it changes
 * nothing) or by a text reply carrying the page's short code, received by the messaging
 * service's inbound hook. Either works once, for the paged person, until it expires.
 */
import { and, eq, isNull } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { DomainError, RateLimitError } from '../platform/errors';
import { loadSessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { peopleWithNumber } from '../people/phone';
import { attemptsSince, recordAttempt, secondsUntilWindowFrees } from '../people/attempts';
import { acknowledge } from './paging';
import { codeInReply, readAckToken } from './ack-tokens';
import { formatUtc } from '../../alerts/display';
import { validInboundSignature } from '../platform/phone';
import { toE164 } from '../../page-channels.ts';
import { PHONE_REPLIES_PER_ADDRESS_PER_MIN, PHONE_REPLIES_PER_NUMBER_PER_MIN, PHONE_TEXT_MAX_CHARS } from '../../limits.ts';

export class AckLinkError extends DomainError {
	constructor(status: number, code: string, message: string) {
		super(status, code, message);
	}
}

export interface AckOffer {
	/** The paged person's first name, so they recognise the link as theirs. */
	name: string;
	sourceEventId: string;
	eventId: string;
	expiresAt: Date;
	/** Already acknowledged (by this link or on the board): nothing left to do. */
	acknowledgedBy: string | null;
}

const INVALID = 'This acknowledgement link is not valid. It may have been copied incompletely: open the event on the board and acknowledge there.';

interface Loaded {
	page: table.DutyPage;
	ack: table.PageAck;
	user: NonNullable<ReturnType<typeof loadSessionUser>>;
	sourceEventId: string;
}

function load(pageId: string, now: Date): Loaded {
	const page = db.select().from(table.dutyPage).where(eq(table.dutyPage.id, pageId)).get();
	const ack = db.select().from(table.pageAck).where(eq(table.pageAck.pageId, pageId)).get();
	if (!page || !ack) throw new AckLinkError(404, 'unknown_page', 'This page no longer exists: the event may have been removed.');
	const user = loadSessionUser(page.userId);
	if (!user) throw new AckLinkError(403, 'disabled', 'The account this page was sent to is disabled: it cannot acknowledge.');
	if (!can({ user }, 'events.acknowledge')) throw new AckLinkError(403, 'forbidden', `${user.name} may no longer acknowledge alerts: ask the coordinator.`);
	if (ack.usedAt) throw new AckLinkError(409, 'used', `This link was already used, at ${formatUtc(ack.usedAt)}. Each acknowledgement link works once.`);
	if (ack.expiresAt.getTime() <= now.getTime()) throw new AckLinkError(410, 'expired', `This link expired at ${formatUtc(ack.expiresAt)}. Open the event on the board and acknowledge there.`);
	const ev = db.select({ sourceEventId: table.gwEvent.sourceEventId }).from(table.gwEvent).where(eq(table.gwEvent.id, page.eventId)).get();
	return { page, ack, user, sourceEventId: ev?.sourceEventId ?? page.eventId };
}

function ackerName(page: table.DutyPage): string | null {
	if (!page.acknowledgedAt) return null;
	const by = page.acknowledgedBy ? db.select({ name: table.user.name }).from(table.user).where(eq(table.user.id, page.acknowledgedBy)).get() : undefined;
	return by?.name ?? 'someone';
}

/** What opening a link shows; refuses a forged, expired or used link. Changes nothing. */
export function ackLinkPreview(token: string, now = new Date()): AckOffer {
	const read = readAckToken(token);
	if (!read) throw new AckLinkError(400, 'invalid_link', INVALID);
	const l = load(read.pageId, now);
	if (read.expiresAt.getTime() <= now.getTime()) throw new AckLinkError(410, 'expired', `This link expired at ${formatUtc(read.expiresAt)}. Open the event on the board and acknowledge there.`);
	return { name: l.user.name.split(/\s+/)[0], sourceEventId: l.sourceEventId, eventId: l.page.eventId, expiresAt: read.expiresAt, acknowledgedBy: ackerName(l.page) };
}

export interface AckDone {
	sourceEventId: string;
	eventId: string;
	name: string;
	/** Pages closed now; 0 when someone had acknowledged the event already. */
	pages: number;
	acknowledgedBy: string;
}

/** Use the page's one-time acknowledgement: mark it used (once, decided by the database), then acknowledge the event. */
function useAck(l: Loaded, now: Date): AckDone {
	const taken = db
		.update(table.pageAck)
		.set({ usedAt: now })
		.where(and(eq(table.pageAck.pageId, l.page.id), isNull(table.pageAck.usedAt)))
		.run();
	if (taken.changes === 0) throw new AckLinkError(409, 'used', 'This acknowledgement was already used. Each link and reply code works once.');
	const open = db
		.select({ id: table.dutyPage.id })
		.from(table.dutyPage)
		.where(and(eq(table.dutyPage.eventId, l.page.eventId), isNull(table.dutyPage.acknowledgedAt)))
		.get();
	if (!open) {
		const done = db.select().from(table.dutyPage).where(eq(table.dutyPage.id, l.page.id)).get()!;
		return { sourceEventId: l.sourceEventId, eventId: l.page.eventId, name: l.user.name, pages: 0, acknowledgedBy: ackerName(done) ?? 'someone' };
	}
	const r = acknowledge({ id: l.user.id, name: l.user.name }, l.page.eventId, now);
	return { sourceEventId: l.sourceEventId, eventId: l.page.eventId, name: l.user.name, pages: r.pages, acknowledgedBy: l.user.name };
}

/** Confirming a link (the POST): acknowledges for the link's person. */
export function acknowledgeByLink(token: string, now = new Date()): AckDone {
	const read = readAckToken(token);
	if (!read) throw new AckLinkError(400, 'invalid_link', INVALID);
	if (read.expiresAt.getTime() <= now.getTime()) throw new AckLinkError(410, 'expired', `This link expired at ${formatUtc(read.expiresAt)}. Open the event on the board and acknowledge there.`);
	return useAck(load(read.pageId, now), now);
}

/**
 * A text reply from `from` (E.164, as the service gives it): the code in it acknowledges the page
 * it belongs to, for a person whose verified number sent it. Returns the answer to text back.
 */
export function acknowledgeByReply(from: string, body: string, now = new Date()): { done: AckDone | null; answer: string; status: number } {
	const code = codeInReply(body);
	if (!code) return { done: null, status: 422, answer: 'Strainline: no acknowledgement code found in your reply. Reply with the six-character code from the page.' };
	const people = peopleWithNumber(from);
	if (people.length === 0) return { done: null, status: 404, answer: 'Strainline: this number is not verified for any account, so it cannot acknowledge.' };
	for (const userId of people) {
		const ack = db.select().from(table.pageAck).where(and(eq(table.pageAck.userId, userId), eq(table.pageAck.code, code))).get();
		if (!ack) continue;
		try {
			const done = useAck(load(ack.pageId, now), now);
			return {
				done,
				status: 200,
				answer: done.pages > 0 ? `Strainline: ${done.sourceEventId} acknowledged by ${done.name}. Thank you.` : `Strainline: ${done.sourceEventId} had already been acknowledged by ${done.acknowledgedBy}.`
			};
		} catch (e) {
			if (!(e instanceof AckLinkError)) throw e;
			return { done: null, status: e.status, answer: `Strainline: ${e.message}` };
		}
	}
	return { done: null, status: 404, answer: `Strainline: the code ${code} does not belong to a page sent to this number.` };
}

const REPLY_WINDOW_MS = 60_000;

const inSeconds = (s: number) => (s === 1 ? '1 second' : `${s} seconds`);

/**
 * Refuse with 429 when `key` already made `limit` requests within the last minute; otherwise count
 * this one. Counted in the same table as sign-in attempts (`people/attempts.ts`), so the limit
 * holds across a restart. A refused request is not counted: waiting is never made longer by trying.
 */
function takeReplySlot(key: string, limit: number, now: Date, tooMany: (wait: string) => string): void {
	const recent = attemptsSince(key, new Date(now.getTime() - REPLY_WINDOW_MS));
	if (recent.count >= limit) {
		const retryAfterS = secondsUntilWindowFrees(recent.oldest, REPLY_WINDOW_MS, now);
		throw new RateLimitError(tooMany(inSeconds(retryAfterS)), retryAfterS);
	}
	recordAttempt([key], true, now);
}

/**
 * The messaging service's inbound webhook: a text sent to our number. Limited per client address
 * (every request, signed or not) to PHONE_REPLIES_PER_ADDRESS_PER_MIN and, once the signature
 * checks, per sender's number to PHONE_REPLIES_PER_NUMBER_PER_MIN: an unsigned request cannot use
 * up a duty scientist's replies. Refuses a request whose signature does not check (403), then
 * treats the text as a reply to a page. `url` is our public URL of the hook, as the service signed it.
 */
export async function receiveInboundText(
	o: { url: string; signature: string; params: Record<string, string>; clientAddress: string },
	now = new Date()
): Promise<{ status: number; answer: string }> {
	takeReplySlot(
		`reply-ip:${o.clientAddress}`,
		PHONE_REPLIES_PER_ADDRESS_PER_MIN,
		now,
		(wait) => `Too many text replies from this address: at most ${PHONE_REPLIES_PER_ADDRESS_PER_MIN} a minute. Try again in ${wait}.`
	);
	if (!(await validInboundSignature(o.signature, o.url, o.params))) throw new AckLinkError(403, 'bad_signature', 'The request signature does not match: this hook accepts only requests signed by the messaging service.');
	const from = toE164(o.params.From ?? '');
	const body = o.params.Body ?? '';
	if (!from) throw new AckLinkError(400, 'invalid', 'The sender’s number is missing or not in international form.');
	takeReplySlot(
		`reply-from:${from}`,
		PHONE_REPLIES_PER_NUMBER_PER_MIN,
		now,
		(wait) => `Too many text replies from ${from}: at most ${PHONE_REPLIES_PER_NUMBER_PER_MIN} a minute. Wait ${wait}, then reply with the page’s code once.`
	);
	if (body.length > PHONE_TEXT_MAX_CHARS) throw new AckLinkError(413, 'too_large', `A text has at most ${PHONE_TEXT_MAX_CHARS} characters.`);
	const r = acknowledgeByReply(from, body, now);
	return { status: r.status, answer: r.answer };
}

/** After confirming: what the link did (a link that verifies and was used); null when it has not been used. */
export function ackLinkOutcome(token: string): { sourceEventId: string; eventId: string; acknowledgedBy: string; usedAt: Date } | null {
	const read = readAckToken(token);
	if (!read) throw new AckLinkError(400, 'invalid_link', INVALID);
	const ack = db.select().from(table.pageAck).where(eq(table.pageAck.pageId, read.pageId)).get();
	const page = db.select().from(table.dutyPage).where(eq(table.dutyPage.id, read.pageId)).get();
	if (!ack || !page) throw new AckLinkError(404, 'unknown_page', 'This page no longer exists: the event may have been removed.');
	if (!ack.usedAt) return null;
	const ev = db.select({ sourceEventId: table.gwEvent.sourceEventId }).from(table.gwEvent).where(eq(table.gwEvent.id, page.eventId)).get();
	return { sourceEventId: ev?.sourceEventId ?? page.eventId, eventId: page.eventId, acknowledgedBy: ackerName(page) ?? 'someone', usedAt: ack.usedAt };
}
