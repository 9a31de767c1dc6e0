/**
 * The page outbox: every page (and stand-down) is written as one row per channel — e-mail, text,
 * voice — before anything is sent, then sent by `sendDue`. A failed try is retried after
 * PAGE_RETRY_BASE_S × 2^(tries−1) seconds, up to PAGE_SEND_MAX_ATTEMPTS tries; after that the row
 * stays 'failed'. Each outcome is logged (`duty.page-delivery`) so the board and the event's duty
 * pages show it live: nothing is lost without a trace.
 */
import { and, asc, eq, inArray, lte } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { placeCall, sendText } from '../platform/phone';
import { every } from '../platform/periodic';
import { record, SYSTEM, type LivePayloads } from '../platform/realtime';
import { notify } from '../people/notifications';
import { reachFor } from '../people/phone';
import { randomId } from '../people/auth';
import { PAGE_RETRY_BASE_S, PAGE_SEND_MAX_ATTEMPTS, PHONE_TEXT_MAX_CHARS } from '../../limits.ts';
import type { Channel } from '../../page-channels.ts';

/** How often the outbox is looked at for retries that are due. */
export const PAGE_DELIVERY_CHECK_MS = 5_000;

export interface PageLetter {
	eventId: string;
	/** The duty page; null for a stand-down. */
	pageId: string | null;
	userId: string;
	name: string;
	email: string;
	kind: 'duty.page' | 'duty.stand-down';
	mail: { subject: string; text: string };
	/** The text message. */
	short: string;
	/** What the voice call says. */
	spoken: string;
}

export function retryDelayMs(attempts: number): number {
	return PAGE_RETRY_BASE_S * 1000 * 2 ** Math.max(0, attempts - 1);
}

/** Write the letters to the outbox, one row per channel the person uses for that kind. Returns the row ids. */
export function queueLetters(letters: PageLetter[], now = new Date()): string[] {
	const ids: string[] = [];
	db.transaction((tx) => {
		for (const l of letters) {
			const reach = reachFor(l.userId, l.kind);
			for (const channel of reach.channels) {
				const id = randomId();
				const body = channel === 'email' ? l.mail.text : channel === 'sms' ? l.short.slice(0, PHONE_TEXT_MAX_CHARS) : l.spoken;
				tx.insert(table.pageMessage)
					.values({
						id,
						eventId: l.eventId,
						pageId: l.pageId,
						userId: l.userId,
						kind: l.kind,
						channel,
						address: channel === 'email' ? l.email : reach.number!,
						subject: l.mail.subject,
						body,
						status: 'queued',
						attempts: 0,
						nextAttemptAt: now,
						createdAt: now
					})
					.run();
				ids.push(id);
			}
		}
	});
	return ids;
}

async function sendOne(m: table.PageMessage, name: string): Promise<string | null> {
	switch (m.channel as Channel) {
		case 'email':
			await notify({ userId: m.userId, name, email: m.address }, m.kind, null, { subject: m.subject, text: m.body });
			return null;
		case 'sms':
			return sendText(m.address, m.body);
		case 'voice':
			return placeCall(m.address, m.body);
	}
}

/** Logged in the board room and the event's room, as the other paging messages are. */
function logOutcome(payload: LivePayloads['duty.page-delivery']): void {
	record(SYSTEM, 'duty.page-delivery', 'board', payload);
	record(SYSTEM, 'duty.page-delivery', `event:${payload.eventId}`, payload);
}

/**
 * Send what is due at `now` (or only the rows `ids`, when given, if due). Each row is taken by
 * raising its try count where it still has the count read, so two senders never send one row
 * twice. Returns how many were sent.
 */
export async function sendDue(now = new Date(), ids?: string[]): Promise<number> {
	const due = db
		.select({ m: table.pageMessage, name: table.user.name })
		.from(table.pageMessage)
		.innerJoin(table.user, eq(table.user.id, table.pageMessage.userId))
		.where(
			and(
				eq(table.pageMessage.status, 'queued'),
				lte(table.pageMessage.nextAttemptAt, now),
				ids ? inArray(table.pageMessage.id, ids.length ? ids : ['']) : undefined
			)
		)
		.orderBy(asc(table.pageMessage.createdAt))
		.all();
	let sent = 0;
	await Promise.all(
		due.map(async ({ m, name }) => {
			const attempts = m.attempts + 1;
			const taken = db
				.update(table.pageMessage)
				.set({ attempts, nextAttemptAt: new Date(now.getTime() + retryDelayMs(attempts)) })
				.where(and(eq(table.pageMessage.id, m.id), eq(table.pageMessage.status, 'queued'), eq(table.pageMessage.attempts, m.attempts)))
				.run();
			if (taken.changes === 0) return;
			const base = { eventId: m.eventId, pageId: m.pageId, userId: m.userId, name, channel: m.channel, attempts };
			try {
				const ref = await sendOne(m, name);
				db.update(table.pageMessage).set({ status: 'sent', sentAt: new Date(), providerRef: ref, lastError: null, nextAttemptAt: null }).where(eq(table.pageMessage.id, m.id)).run();
				sent++;
				logOutcome({ ...base, status: 'sent', error: null });
			} catch (e) {
				const error = ((e as Error).message || String(e)).slice(0, 500);
				const final = attempts >= PAGE_SEND_MAX_ATTEMPTS;
				console.error(`page ${m.channel} to ${m.address} failed (try ${attempts}${final ? ', giving up' : ''}): ${error}`);
				db.update(table.pageMessage)
					.set({ status: final ? 'failed' : 'queued', lastError: error, nextAttemptAt: final ? null : new Date(now.getTime() + retryDelayMs(attempts)) })
					.where(eq(table.pageMessage.id, m.id))
					.run();
				logOutcome({ ...base, status: final ? 'failed' : 'retrying', error });
			}
		})
	);
	return sent;
}

export interface DeliveryView {
	channel: Channel;
	status: table.PageMessage['status'];
	attempts: number;
	lastError: string | null;
	sentAt: Date | null;
	nextAttemptAt: Date | null;
}

/** The deliveries of some pages, by page id, in the order the channels were queued. */
export function deliveriesOf(pageIds: string[]): Map<string, DeliveryView[]> {
	const out = new Map<string, DeliveryView[]>();
	if (pageIds.length === 0) return out;
	const rows = db.select().from(table.pageMessage).where(inArray(table.pageMessage.pageId, pageIds)).orderBy(asc(table.pageMessage.createdAt)).all();
	for (const r of rows) {
		const list = out.get(r.pageId!) ?? [];
		list.push({ channel: r.channel, status: r.status, attempts: r.attempts, lastError: r.lastError, sentAt: r.sentAt, nextAttemptAt: r.nextAttemptAt });
		out.set(r.pageId!, list);
	}
	return out;
}

/** Start the periodic retry of due rows (null: none, for tests that call `sendDue`). Returns the stop function. */
export function retryEvery(ms: number | null): (() => void) | null {
	return ms === null ? null : every(ms, () => sendDue(), 'page delivery');
}
