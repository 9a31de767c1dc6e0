/**
 * The duty roster and paging: whoever is on shift gets an e-mail for each significant notice and
 * acknowledges it on the board; a page nobody acknowledges in time goes to the next person on
 * the roster. Acknowledgement latency (notice received → acknowledged) is kept per page.
 */
import { and, asc, desc, eq, gt, inArray, isNull, lt, lte } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { config } from '../platform/config';
import { loadSessionUser, randomId, type SessionUser } from '../people/auth';
import type { OutgoingMail } from '../platform/mail';
import { issueAck, type IssuedAck } from './ack-tokens';
import { deliveriesOf, PAGE_DELIVERY_CHECK_MS, queueLetters, retryEvery, sendDue, type DeliveryView, type PageLetter } from './page-delivery';
import { every } from '../platform/periodic';
import { restartService } from '../platform/services';
import { onRecorded, record, SYSTEM, type Actor, type LivePayloads } from '../platform/realtime';
import { can, rolesFor } from '../people/permissions';
import { InputError } from '../platform/errors';
import {
	dominantClass,
	formatArea,
	formatDistance,
	formatFar,
	formatPercent,
	formatUtc,
	KIND_LABELS,
	SOURCE_CLASSES
} from '../../alerts/display';

export const DEFAULT_ESCALATE_AFTER_MIN = 10;
export const ESCALATION_CHECK_MS = 15_000;

export class DutyError extends InputError {}

export interface Person {
	userId: string;
	name: string;
	email: string;
}

export interface ShiftOnNow extends Person {
	shiftId: string;
	rank: number;
	startsAt: Date;
	endsAt: Date;
	handoverNote: string;
}

// ───────────────────────────── Roster ─────────────────────────────

/**
 * People on shift at `now` in escalation order (rank, then who started first). A person with
 * two overlapping shifts appears once, at their better rank. Disabled accounts are left out.
 */
export function onShift(now = new Date()): ShiftOnNow[] {
	const rows = db
		.select({
			shiftId: table.dutyShift.id,
			userId: table.dutyShift.userId,
			rank: table.dutyShift.rank,
			startsAt: table.dutyShift.startsAt,
			endsAt: table.dutyShift.endsAt,
			handoverNote: table.dutyShift.handoverNote,
			name: table.user.name,
			email: table.user.email
		})
		.from(table.dutyShift)
		.innerJoin(table.user, eq(table.user.id, table.dutyShift.userId))
		.where(and(lte(table.dutyShift.startsAt, now), gt(table.dutyShift.endsAt, now), isNull(table.user.disabledAt)))
		.orderBy(asc(table.dutyShift.rank), asc(table.dutyShift.startsAt))
		.all();
	const seen = new Set<string>();
	return rows.filter((r) => (seen.has(r.userId) ? false : (seen.add(r.userId), true)));
}

/** Everyone holding the duty-scientist role (the fallback when the roster is empty). */
export function dutyPeople(): Person[] {
	return db
		.select({ userId: table.user.id, name: table.user.name, email: table.user.email })
		.from(table.userRole)
		.innerJoin(table.user, eq(table.user.id, table.userRole.userId))
		.where(and(eq(table.userRole.role, 'duty'), isNull(table.user.disabledAt)))
		.orderBy(asc(table.user.name))
		.all();
}

/** People who may be put on the roster: those who can acknowledge a page. */
export function rosterablePeople(): Person[] {
	const rows = db
		.selectDistinct({ userId: table.user.id, name: table.user.name, email: table.user.email })
		.from(table.userRole)
		.innerJoin(table.user, eq(table.user.id, table.userRole.userId))
		.where(and(inArray(table.userRole.role, [...rolesFor('events.acknowledge')]), isNull(table.user.disabledAt)))
		.orderBy(asc(table.user.name))
		.all();
	return rows;
}

/** Shifts that overlap [from, to), earliest first, with the person's name. */
export function listShifts(from: Date, to: Date) {
	return db
		.select({
			id: table.dutyShift.id,
			userId: table.dutyShift.userId,
			name: table.user.name,
			email: table.user.email,
			startsAt: table.dutyShift.startsAt,
			endsAt: table.dutyShift.endsAt,
			rank: table.dutyShift.rank,
			handoverNote: table.dutyShift.handoverNote
		})
		.from(table.dutyShift)
		.innerJoin(table.user, eq(table.user.id, table.dutyShift.userId))
		.where(and(lt(table.dutyShift.startsAt, to), gt(table.dutyShift.endsAt, from)))
		.orderBy(asc(table.dutyShift.startsAt), asc(table.dutyShift.rank))
		.all();
}

export interface ShiftInput {
	userId: string;
	startsAt: Date;
	endsAt: Date;
	rank: number;
	handoverNote?: string;
}

/**
 * Put someone on the roster. The person must be able to acknowledge pages (duty scientist or
 * coordinator), otherwise a page to them could never be answered on the board.
 */
export function addShift(actor: Actor, input: ShiftInput): string {
	if (!(input.endsAt.getTime() > input.startsAt.getTime())) throw new DutyError('The shift must end after it starts.', 'endsAt');
	if (!Number.isInteger(input.rank) || input.rank < 0 || input.rank > 20) throw new DutyError('Rank is a whole number from 0 to 20.', 'rank');
	const user = loadSessionUser(input.userId);
	if (!user) throw new DutyError('Choose a person.', 'userId');
	if (!can({ user }, 'events.acknowledge')) {
		throw new DutyError(`${user.name} cannot acknowledge alerts: only duty scientists and coordinators go on the roster.`, 'userId');
	}
	const id = randomId();
	db.insert(table.dutyShift)
		.values({ id, userId: user.id, startsAt: input.startsAt, endsAt: input.endsAt, rank: input.rank, handoverNote: input.handoverNote ?? '' })
		.run();
	record(actor, 'shift.added', 'board', {
		shiftId: id,
		userId: user.id,
		name: user.name,
		startsAt: input.startsAt.toISOString(),
		endsAt: input.endsAt.toISOString(),
		rank: input.rank
	});
	return id;
}

export function removeShift(actor: Actor, shiftId: string): void {
	const shift = db.select().from(table.dutyShift).where(eq(table.dutyShift.id, shiftId)).get();
	if (!shift) throw new DutyError('That shift is no longer on the roster.');
	db.delete(table.dutyShift).where(eq(table.dutyShift.id, shiftId)).run();
	record(actor, 'shift.removed', 'board', { shiftId, userId: shift.userId });
}

/** The hand-over note is written by the person whose shift it is (or a coordinator). */
export function setHandoverNote(user: SessionUser, shiftId: string, note: string): void {
	const shift = db.select().from(table.dutyShift).where(eq(table.dutyShift.id, shiftId)).get();
	if (!shift) throw new DutyError('That shift is no longer on the roster.');
	const manager = can({ user }, 'shifts.manage');
	if (shift.userId !== user.id && !manager) throw new DutyError('Only the person on this shift can write its hand-over note.', 'handoverNote');
	db.update(table.dutyShift).set({ handoverNote: note }).where(eq(table.dutyShift.id, shiftId)).run();
	record({ userId: user.id, label: user.name }, 'shift.handover-written', 'board', { shiftId });
}

// ───────────────────────────── Paging ─────────────────────────────

/** Minutes before an unacknowledged page escalates: the triage policy's value, or the default. */
export function escalateAfterMin(): number {
	const row = db.select({ m: table.triagePolicy.escalateAfterMin }).from(table.triagePolicy).where(eq(table.triagePolicy.id, 1)).get();
	return row && Number.isFinite(row.m) && row.m > 0 ? row.m : DEFAULT_ESCALATE_AFTER_MIN;
}

/** An entry logged in the board room and in the event's own room. */
function announce<A extends 'duty.paged' | 'duty.escalated' | 'duty.escalation-exhausted' | 'duty.nobody-to-page' | 'event.acknowledged'>(
	actor: Actor,
	action: A,
	eventId: string,
	payload: LivePayloads[A]
): void {
	record(actor, action, 'board', payload);
	record(actor, action, `event:${eventId}`, payload);
}

interface Recipients {
	people: Person[];
	/** True when nobody is on shift and every duty scientist is paged instead. */
	fallback: boolean;
}

/** Who gets a page at `level`: the first person on shift not already in `exclude`. */
function recipientsFor(now: Date, exclude: ReadonlySet<string>): Recipients {
	const shift = onShift(now);
	if (shift.length === 0) return { people: dutyPeople().filter((p) => !exclude.has(p.userId)), fallback: true };
	const next = shift.find((p) => !exclude.has(p.userId));
	return { people: next ? [next] : [], fallback: false };
}

interface PageContext {
	event: table.GwEvent;
	notice: table.Notice;
	summary: table.SkymapSummary | null;
}

function pageContext(eventId: string, noticeId: string): PageContext | null {
	const event = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	const notice = db.select().from(table.notice).where(eq(table.notice.id, noticeId)).get();
	if (!event || !notice) return null;
	const ownMap = db
		.select({ summary: table.skymap.summary })
		.from(table.skymap)
		.where(eq(table.skymap.noticeId, noticeId))
		.orderBy(desc(table.skymap.createdAt))
		.get();
	let summary = ownMap?.summary ?? null;
	if (!summary && event.latestSkymapId) {
		summary = db.select({ summary: table.skymap.summary }).from(table.skymap).where(eq(table.skymap.id, event.latestSkymapId)).get()?.summary ?? null;
	}
	return { event, notice, summary };
}

export function eventLink(eventId: string): string {
	return `${config.publicUrl}/events/${encodeURIComponent(eventId)}`;
}

/**
 * The page e-mail. The subject alone lets someone decide whether to run to a screen: event,
 * notice kind, false-alarm rate, neutron-star classes, 90% area and distance.
 */
export function composePage(
	ctx: PageContext,
	o: { recipient: Person; level: number; afterMin: number; escalatedFrom?: string[]; fallback?: boolean; ack?: IssuedAck }
): OutgoingMail {
	const { event, notice, summary } = ctx;
	const farHz = notice.farHz ?? event.farHz;
	const cls = notice.classification ?? event.classification;
	const kind = KIND_LABELS[notice.kind] ?? notice.kind;
	const area = formatArea(summary?.area90);
	const distance = formatDistance(summary?.distanceMean, summary?.distanceStd);
	const subject = [
		o.level > 0 ? 'ESCALATED' : null,
		`${event.sourceEventId} ${kind.toLowerCase()}`,
		`FAR ${formatFar(farHz)}`,
		`BNS ${formatPercent(cls?.BNS)} NSBH ${formatPercent(cls?.NSBH)}`,
		`90% ${area}`,
		distance
	]
		.filter(Boolean)
		.join(' · ');
	const link = eventLink(event.id);
	const top = dominantClass(cls);
	const classes = cls ? SOURCE_CLASSES.map((c) => `${c} ${formatPercent(cls[c])}`).join(', ') : 'not given';
	const lines = [
		`${o.recipient.name},`,
		'',
		o.level > 0
			? `This page was escalated to you: ${o.escalatedFrom?.join(', ') || 'the person before you on the roster'} did not acknowledge within ${o.afterMin} min.`
			: o.fallback
				? 'Nobody is on the duty roster right now, so every duty scientist receives this page.'
				: 'You are on duty: a significant gravitational-wave notice needs your acknowledgement.',
		'',
		`Event:            ${event.sourceEventId}${event.role === 'observation' ? '' : ` (${event.role})`}`,
		`Notice:           ${kind}, authored ${formatUtc(notice.authoredAt)}`,
		`Merger time:      ${formatUtc(event.eventTime)}`,
		`False-alarm rate: ${formatFar(farHz)}`,
		`Source class:     ${top ? `${top.name} most probable; ` : ''}${classes}`,
		`90% area:         ${area}${summary ? ` (50%: ${formatArea(summary.area50)})` : ''}`,
		`Distance:         ${distance}`,
		event.triage ? `Triage:           ${event.triage.verdict}${event.triage.reasons.length ? ` — ${event.triage.reasons.join('; ')}` : ''}` : null,
		'',
		`Acknowledge on the event page: ${link}`,
		o.ack ? `Or without signing in (this link works once, for you, until ${formatUtc(o.ack.expiresAt)}): ${o.ack.link}` : null,
		o.ack ? `Or reply ${o.ack.code} to the text message of this page.` : null,
		`Unacknowledged after ${o.afterMin} min, the page goes to the next person on the roster.`,
		'',
		'Alerts can be retracted. Preliminary notices are produced automatically and may be retracted or revised.'
	].filter((l): l is string => l !== null);
	return { to: o.recipient.email, subject, text: lines.join('\n') };
}

/** The text message of a page: what the subject says, and how to acknowledge from the phone. */
export function composeShortPage(ctx: PageContext, o: { level: number; ack: IssuedAck }): string {
	const { event, notice, summary } = ctx;
	const kind = (KIND_LABELS[notice.kind] ?? notice.kind).toLowerCase();
	const cls = notice.classification ?? event.classification;
	return [
		`Strainline${o.level > 0 ? ' ESCALATED' : ''}: ${event.sourceEventId} ${kind}, FAR ${formatFar(notice.farHz ?? event.farHz)}, BNS ${formatPercent(cls?.BNS)}, 90% ${formatArea(summary?.area90)}.`,
		`Acknowledge: ${o.ack.link} or reply ${o.ack.code}.`,
		'Alerts can be retracted.'
	].join(' ');
}

/** What the voice call says: short, spelled so a speech engine reads it clearly. */
export function composeSpokenPage(ctx: PageContext, o: { level: number; ack: IssuedAck }): string {
	const { event, notice } = ctx;
	const kind = (KIND_LABELS[notice.kind] ?? notice.kind).toLowerCase();
	return [
		`This is Strainline${o.level > 0 ? ', with an escalated page' : ''}.`,
		`A significant gravitational-wave notice needs the duty scientist: event ${event.sourceEventId.split('').join(' ')}, ${kind} notice.`,
		`To acknowledge, open the link in the text message, or reply with the code ${o.ack.code.split('').join(' ')}.`
	].join(' ');
}

/** Letters for one page: the e-mail, the text and the spoken message, with the page's one-time acknowledgement. */
function pageLetter(ctx: PageContext, page: { id: string; level: number }, p: Person, o: { afterMin: number; escalatedFrom?: string[]; fallback?: boolean }, now: Date): PageLetter {
	const ack = issueAck(page.id, p.userId, now);
	return {
		eventId: ctx.event.id,
		pageId: page.id,
		userId: p.userId,
		name: p.name,
		email: p.email,
		kind: 'duty.page',
		mail: composePage(ctx, { recipient: p, level: page.level, ack, ...o }),
		short: composeShortPage(ctx, { level: page.level, ack }),
		spoken: composeSpokenPage(ctx, { level: page.level, ack })
	};
}

/**
 * Pages go into the outbox (one row per channel of each person) and the first try is made at
 * once; failed tries are retried by the outbox's timer. Resolves after the first tries.
 */
async function deliver(letters: PageLetter[], now: Date): Promise<void> {
	if (letters.length === 0) return;
	await sendDue(now, queueLetters(letters, now));
}

/**
 * Page the person on shift for one significant notice (everyone with the duty role when nobody
 * is on shift). A notice is paged once: a repeat of its `notice.processed` changes nothing.
 * Resolves when the e-mails have been handed to the mail server.
 */
export async function pageForNotice(eventId: string, noticeId: string, now = new Date()): Promise<table.DutyPage[]> {
	const already = db.select({ id: table.dutyPage.id }).from(table.dutyPage).where(eq(table.dutyPage.noticeId, noticeId)).get();
	if (already) return [];
	const ctx = pageContext(eventId, noticeId);
	if (!ctx) return [];
	// Test and utility notices (VOEvent 2.0 §3.1.2) never page anyone, whatever the triage policy says.
	if (ctx.notice.role !== 'observation' || ctx.event.role !== 'observation') return [];
	const { people, fallback } = recipientsFor(now, new Set());
	if (people.length === 0) {
		announce(SYSTEM, 'duty.nobody-to-page', eventId, { eventId, noticeId });
		return [];
	}
	const rows = people.map((p) => ({ id: randomId(), eventId, noticeId, userId: p.userId, level: 0, sentAt: now }));
	db.transaction((tx) => {
		for (const r of rows) tx.insert(table.dutyPage).values(r).run();
	});
	const names = people.map((p) => p.name);
	announce(SYSTEM, 'duty.paged', eventId, { eventId, noticeId, level: 0, to: names, fallback });
	if (fallback) record(SYSTEM, 'duty.nobody-on-shift', 'board', { eventId, noticeId, paged: names });
	const afterMin = escalateAfterMin();
	await deliver(
		people.map((p, i) => pageLetter(ctx, rows[i], p, { afterMin, fallback }, now)),
		now
	);
	return db.select().from(table.dutyPage).where(inArray(table.dutyPage.id, rows.map((r) => r.id))).all();
}

/**
 * Hand every page left unacknowledged for the policy's minutes to the next person on shift
 * (a new page, one level up; the old ones are marked escalated). Pages of retracted or closed
 * events do not escalate. When nobody further is on the roster the pages are marked escalated
 * without a successor and the board is told once. Returns how many events escalated.
 */
export async function escalate(now = new Date()): Promise<number> {
	const afterMin = escalateAfterMin();
	const cutoff = new Date(now.getTime() - afterMin * 60_000);
	const overdue = db
		.select({ page: table.dutyPage, name: table.user.name })
		.from(table.dutyPage)
		.innerJoin(table.gwEvent, eq(table.gwEvent.id, table.dutyPage.eventId))
		.innerJoin(table.user, eq(table.user.id, table.dutyPage.userId))
		.where(
			and(
				isNull(table.dutyPage.acknowledgedAt),
				isNull(table.dutyPage.escalatedAt),
				lte(table.dutyPage.sentAt, cutoff),
				eq(table.gwEvent.state, 'active')
			)
		)
		.orderBy(asc(table.dutyPage.sentAt))
		.all();
	const byEvent = new Map<string, { page: table.DutyPage; name: string }[]>();
	for (const o of overdue) byEvent.set(o.page.eventId, [...(byEvent.get(o.page.eventId) ?? []), o]);

	const outgoing: PageLetter[] = [];
	for (const [eventId, group] of byEvent) {
		const pages = group.map((g) => g.page);
		const newest = pages[pages.length - 1];
		const level = Math.max(...pages.map((p) => p.level)) + 1;
		const noticeIds = [...new Set(pages.map((p) => p.noticeId))];
		// Everyone already asked about these notices is skipped: escalation moves down the roster.
		const asked = new Set(
			db
				.select({ userId: table.dutyPage.userId })
				.from(table.dutyPage)
				.where(and(eq(table.dutyPage.eventId, eventId), inArray(table.dutyPage.noticeId, noticeIds)))
				.all()
				.map((r) => r.userId)
		);
		const { people, fallback } = recipientsFor(now, asked);
		const rows = people.map((p) => ({ id: randomId(), eventId, noticeId: newest.noticeId, userId: p.userId, level, sentAt: now }));
		db.transaction((tx) => {
			tx.update(table.dutyPage)
				.set({ escalatedAt: now })
				.where(inArray(table.dutyPage.id, pages.map((p) => p.id)))
				.run();
			for (const r of rows) tx.insert(table.dutyPage).values(r).run();
		});
		const from = [...new Set(group.map((g) => g.name))];
		if (people.length === 0) {
			announce(SYSTEM, 'duty.escalation-exhausted', eventId, { eventId, noticeId: newest.noticeId, level: level - 1, unanswered: from });
			continue;
		}
		announce(SYSTEM, 'duty.escalated', eventId, { eventId, noticeId: newest.noticeId, level, from, to: people.map((p) => p.name), fallback });
		const ctx = pageContext(eventId, newest.noticeId);
		if (!ctx) continue;
		people.forEach((p, i) => outgoing.push(pageLetter(ctx, rows[i], p, { afterMin, escalatedFrom: from, fallback }, now)));
	}
	await deliver(outgoing, now);
	return byEvent.size;
}

/**
 * Acknowledge an event: every open page of it is closed with the time from its notice reaching
 * the inbox (or, for notices without an inbox row, from the notice row) to now. The logged
 * `latencyS` is the longest of these, i.e. how long the event waited for a person.
 */
export function acknowledge(user: { id: string; name: string }, eventId: string, now = new Date()): { pages: number; latencyS: number } {
	const open = db
		.select({ id: table.dutyPage.id, noticeCreatedAt: table.notice.createdAt, receivedAt: table.noticeInbox.receivedAt })
		.from(table.dutyPage)
		.innerJoin(table.notice, eq(table.notice.id, table.dutyPage.noticeId))
		.leftJoin(table.noticeInbox, eq(table.noticeInbox.id, table.notice.inboxId))
		.where(and(eq(table.dutyPage.eventId, eventId), isNull(table.dutyPage.acknowledgedAt)))
		.all();
	if (open.length === 0) throw new DutyError('There is nothing to acknowledge for this event.');
	const latencies = open.map((p) => Math.max(0, (now.getTime() - (p.receivedAt ?? p.noticeCreatedAt).getTime()) / 1000));
	db.transaction((tx) => {
		open.forEach((p, i) =>
			tx.update(table.dutyPage).set({ acknowledgedAt: now, acknowledgedBy: user.id, latencyS: latencies[i] }).where(eq(table.dutyPage.id, p.id)).run()
		);
	});
	const latencyS = Math.max(...latencies);
	announce({ userId: user.id, label: user.name }, 'event.acknowledged', eventId, { eventId, by: user.name, latencyS, pages: open.length });
	return { pages: open.length, latencyS };
}

export interface PageView {
	id: string;
	noticeId: string;
	level: number;
	to: string;
	sentAt: Date;
	escalatedAt: Date | null;
	acknowledgedAt: Date | null;
	acknowledgedBy: string | null;
	latencyS: number | null;
	/** Each channel the page went by: status and tries. */
	deliveries: DeliveryView[];
}

/** Pages of some events, oldest first, with the names of who was paged and who acknowledged. */
export function pagesFor(eventIds: string[]): Map<string, PageView[]> {
	const out = new Map<string, PageView[]>();
	if (eventIds.length === 0) return out;
	const rows = db
		.select({ page: table.dutyPage, to: table.user.name })
		.from(table.dutyPage)
		.innerJoin(table.user, eq(table.user.id, table.dutyPage.userId))
		.where(inArray(table.dutyPage.eventId, eventIds))
		.orderBy(asc(table.dutyPage.sentAt), asc(table.dutyPage.level))
		.all();
	const ackers = new Map(
		db
			.select({ id: table.user.id, name: table.user.name })
			.from(table.user)
			.where(inArray(table.user.id, [...new Set(rows.map((r) => r.page.acknowledgedBy).filter((x): x is string => !!x))].concat([''])))
			.all()
			.map((u) => [u.id, u.name])
	);
	const deliveries = deliveriesOf(rows.map((r) => r.page.id));
	for (const { page, to } of rows) {
		const list = out.get(page.eventId) ?? [];
		list.push({
			id: page.id,
			noticeId: page.noticeId,
			level: page.level,
			to,
			sentAt: page.sentAt,
			escalatedAt: page.escalatedAt,
			acknowledgedAt: page.acknowledgedAt,
			acknowledgedBy: page.acknowledgedBy ? (ackers.get(page.acknowledgedBy) ?? 'a former member') : null,
			latencyS: page.latencyS,
			deliveries: deliveries.get(page.id) ?? []
		});
		out.set(page.eventId, list);
	}
	return out;
}

/** Acknowledgement state of one event, from its pages. */
export function ackState(pages: PageView[]): {
	state: 'none' | 'open' | 'acknowledged';
	openSince: Date | null;
	waitingOn: string[];
	acknowledgedBy: string | null;
	acknowledgedAt: Date | null;
	latencyS: number | null;
} {
	const open = pages.filter((p) => !p.acknowledgedAt);
	const acked = pages.filter((p) => p.acknowledgedAt).sort((a, b) => b.acknowledgedAt!.getTime() - a.acknowledgedAt!.getTime());
	const lastAck = acked[0] ?? null;
	const lastAckLatency = lastAck ? Math.max(...acked.filter((p) => p.acknowledgedAt!.getTime() === lastAck.acknowledgedAt!.getTime()).map((p) => p.latencyS ?? 0)) : null;
	if (open.length > 0) {
		return {
			state: 'open',
			openSince: open[0].sentAt,
			waitingOn: [...new Set(open.filter((p) => !p.escalatedAt).map((p) => p.to))],
			acknowledgedBy: lastAck?.acknowledgedBy ?? null,
			acknowledgedAt: lastAck?.acknowledgedAt ?? null,
			latencyS: lastAckLatency
		};
	}
	if (lastAck) {
		return { state: 'acknowledged', openSince: null, waitingOn: [], acknowledgedBy: lastAck.acknowledgedBy, acknowledgedAt: lastAck.acknowledgedAt, latencyS: lastAckLatency };
	}
	return { state: 'none', openSince: null, waitingOn: [], acknowledgedBy: null, acknowledgedAt: null, latencyS: null };
}

// ───────────────────────────── Wiring ─────────────────────────────

/**
 * Tell everyone who was paged for an event that it was retracted, so nobody keeps observing on
 * the strength of the e-mail they got. Each person is told once per event.
 */
export async function standDown(eventId: string): Promise<number> {
	const ev = db.select({ sourceEventId: table.gwEvent.sourceEventId }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!ev) return 0;
	const paged = db
		.selectDistinct({ userId: table.user.id, email: table.user.email, name: table.user.name })
		.from(table.dutyPage)
		.innerJoin(table.user, eq(table.user.id, table.dutyPage.userId))
		.where(eq(table.dutyPage.eventId, eventId))
		.all();
	const now = new Date();
	await deliver(
		paged.map((p) => ({
			eventId,
			pageId: null,
			userId: p.userId,
			name: p.name,
			email: p.email,
			kind: 'duty.stand-down' as const,
			short: `Strainline: ${ev.sourceEventId} was RETRACTED by the source. Stand down: stop follow-up and release your targets. ${eventLink(eventId)}`,
			spoken: `This is Strainline. Event ${ev.sourceEventId.split('').join(' ')} was retracted by the source. Stand down: stop follow-up observations for it.`,
			mail: {
				subject: `RETRACTED ${ev.sourceEventId} · stand down`,
				text: [
					`${p.name},`,
					'',
					`The source has retracted ${ev.sourceEventId}. Stop follow-up observations for it and release any targets you hold.`,
					'',
					eventLink(eventId)
				].join('\n')
			}
		})),
		now
	);
	return paged.length;
}

/**
 * Start paging: listen for processed notices (and retractions, to stand people down) and check
 * for overdue pages every `escalateEveryMs` (null: no timer, for tests that call `escalate`
 * themselves). Installing twice replaces the first installation. Returns the function that stops both.
 */
export function installDuty(o: { escalateEveryMs?: number | null } = {}): () => void {
	const everyMs = o.escalateEveryMs === undefined ? ESCALATION_CHECK_MS : o.escalateEveryMs;
	return restartService('duty', () => {
		// Both are logged in the board room and the event's room: react to the board copy only.
		const offRetracted = onRecorded('event.retracted', ({ eventId }, m) => {
			if (m.room === 'board') standDown(eventId).catch((e) => console.error(`stand-down for ${eventId} failed`, e));
		});
		const offProcessed = onRecorded('notice.processed', ({ eventId, noticeId, significant }, m) => {
			if (m.room === 'board' && significant) pageForNotice(eventId, noticeId).catch((e) => console.error(`paging for notice ${noticeId} failed`, e));
		});
		const stopEscalation = everyMs === null ? null : every(everyMs, () => escalate(), 'duty escalation');
		// Failed page deliveries are retried on the same schedule switch as escalation (none in tests that drive both by hand).
		const stopRetries = retryEvery(everyMs === null ? null : PAGE_DELIVERY_CHECK_MS);
		return {
			stop() {
				offRetracted();
				offProcessed();
				stopEscalation?.();
				stopRetries?.();
			}
		};
	});
}
