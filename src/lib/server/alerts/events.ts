/**
 * Read side of alerts: events with their latest sky-map summary, one event's notice history,
 * sky maps and triage. Shapes here are what the JSON API returns (architecture.md, "keep these
 * shapes stable") and what the pages show.
 */
import { asc, desc, eq } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { farHzToPerYear } from '../../alerts/voevent.ts';
import { DomainError } from '../platform/errors';
import { CLOSE_REASON_LABELS, type ClosureView } from '../../event-view.ts';

export interface SkymapBrief {
	skymapId: string;
	area50: number;
	area90: number;
	area99: number | null;
	distanceMean: number | null;
	distanceStd: number | null;
	peak: { ra: number; dec: number };
}

export interface EventListItem {
	eventId: string;
	sourceEventId: string;
	state: table.GwEvent['state'];
	role: table.GwEvent['role'];
	test: boolean;
	eventTime: string | null;
	latestKind: table.GwEvent['latestKind'];
	farHz: number | null;
	farPerYear: number | null;
	classification: table.Classification | null;
	skymap: SkymapBrief | null;
	triage: table.TriageVerdict | null;
	/** Who closed the event, when, why and their note; null while it is open. */
	closure: ClosureView | null;
	createdAt: string;
	updatedAt: string | null;
}

function brief(id: string | null, summary: table.SkymapSummary | null | undefined): SkymapBrief | null {
	if (!id || !summary) return null;
	return {
		skymapId: id,
		area50: summary.area50,
		area90: summary.area90,
		area99: summary.area99 ?? null,
		distanceMean: summary.distanceMean,
		distanceStd: summary.distanceStd,
		peak: summary.peak
	};
}

function item(e: table.GwEvent, summary: table.SkymapSummary | null | undefined): EventListItem {
	return {
		eventId: e.id,
		sourceEventId: e.sourceEventId,
		state: e.state,
		role: e.role,
		test: e.role !== 'observation',
		eventTime: e.eventTime?.toISOString() ?? null,
		latestKind: e.latestKind,
		farHz: e.farHz,
		farPerYear: e.farHz === null ? null : farHzToPerYear(e.farHz),
		classification: e.classification,
		skymap: brief(e.latestSkymapId, summary),
		triage: e.triage,
		closure: closureOf(e),
		createdAt: e.createdAt.toISOString(),
		updatedAt: e.updatedAt?.toISOString() ?? null
	};
}

/** Every event (retracted and closed too), newest first, with its latest sky-map summary. */
export function listEvents(opts: { state?: table.GwEvent['state']; limit?: number } = {}): EventListItem[] {
	const q = db
		.select({ event: table.gwEvent, summary: table.skymap.summary })
		.from(table.gwEvent)
		.leftJoin(table.skymap, eq(table.skymap.id, table.gwEvent.latestSkymapId))
		.$dynamic();
	const filtered = opts.state ? q.where(eq(table.gwEvent.state, opts.state)) : q;
	return filtered
		.orderBy(desc(table.gwEvent.createdAt), desc(table.gwEvent.id))
		.limit(opts.limit ?? 500)
		.all()
		.map((r) => item(r.event, r.summary));
}

export interface NoticeItem {
	noticeId: string;
	ivorn: string;
	kind: table.Notice['kind'];
	role: table.Notice['role'];
	authoredAt: string;
	receivedAt: string | null;
	farHz: number | null;
	classification: table.Classification | null;
	properties: table.Notice['properties'];
	skymapUrl: string | null;
	supersedes: string | null;
	citations: table.Notice['citations'];
	/** Whether the event shows this notice's content now. */
	latest: boolean;
	skymap: (SkymapBrief & { filePath: string | null }) | { skymapId: string; error: string } | null;
}

export interface EventDetail extends EventListItem {
	properties: table.GwEvent['properties'];
	latestNoticeId: string | null;
	retractedAt: string | null;
	closedAt: string | null;
	notices: NoticeItem[];
}

export function eventExists(eventId: string): boolean {
	return Boolean(db.select({ id: table.gwEvent.id }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get());
}

/** One event with its notice history (by authored time, oldest first), sky maps and triage. */
export function getEvent(eventId: string): EventDetail | null {
	const e = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!e) return null;
	const maps = db.select().from(table.skymap).where(eq(table.skymap.eventId, eventId)).orderBy(asc(table.skymap.createdAt)).all();
	const byNotice = new Map(maps.map((m) => [m.noticeId, m]));
	const latestMap = maps.find((m) => m.id === e.latestSkymapId);
	const rows = db
		.select({ n: table.notice, receivedAt: table.noticeInbox.receivedAt })
		.from(table.notice)
		.leftJoin(table.noticeInbox, eq(table.noticeInbox.id, table.notice.inboxId))
		.where(eq(table.notice.eventId, eventId))
		.orderBy(asc(table.notice.authoredAt), asc(table.notice.createdAt))
		.all();
	const notices: NoticeItem[] = rows.map(({ n, receivedAt }) => {
		const m = byNotice.get(n.id);
		return {
			noticeId: n.id,
			ivorn: n.ivorn,
			kind: n.kind,
			role: n.role,
			authoredAt: n.authoredAt.toISOString(),
			receivedAt: receivedAt?.toISOString() ?? null,
			farHz: n.farHz,
			classification: n.classification,
			properties: n.properties,
			skymapUrl: n.skymapUrl,
			supersedes: n.supersedesIvorn,
			citations: n.citations,
			latest: e.latestNoticeId === n.id,
			skymap: !m ? null : m.error ? { skymapId: m.id, error: m.error } : { ...brief(m.id, m.summary)!, filePath: m.filePath }
		};
	});
	return {
		...item(e, latestMap?.summary),
		properties: e.properties,
		latestNoticeId: e.latestNoticeId,
		retractedAt: e.retractedAt?.toISOString() ?? null,
		closedAt: e.closedAt?.toISOString() ?? null,
		notices
	};
}

/** What tells one stored version of a sky-map row from another (file hash and row time), for caches keyed by id. */
export function skymapVersion(skymapId: string): string {
	const row = db.select({ sha256: table.skymap.sha256, createdAt: table.skymap.createdAt }).from(table.skymap).where(eq(table.skymap.id, skymapId)).get();
	return row ? `${row.sha256 ?? ''}|${row.createdAt.getTime()}` : '';
}

/** The event a stored sky map belongs to; null for no such map. */
export function skymapEventId(skymapId: string): string | null {
	return db.select({ eventId: table.skymap.eventId }).from(table.skymap).where(eq(table.skymap.id, skymapId)).get()?.eventId ?? null;
}

/** The display raster and contours of a stored sky map (for the sky view). */
export function skymapDisplay(skymapId: string): Record<string, unknown> | null {
	return db.select({ display: table.skymap.display }).from(table.skymap).where(eq(table.skymap.id, skymapId)).get()?.display ?? null;
}

/**
 * Id of the galaxy catalogue a new event is ranked against: the newest ready one. Ingestion stamps
 * it on the event as it arrives; targeting/catalogs.ts `activeCatalog` reads the same rule.
 */
export function catalogInUse(): string | null {
	return (
		db
			.select({ id: table.catalog.id })
			.from(table.catalog)
			.where(eq(table.catalog.state, 'ready'))
			.orderBy(desc(table.catalog.readyAt), desc(table.catalog.createdAt))
			.limit(1)
			.get()?.id ?? null
	);
}

type ClosureFields = Pick<table.GwEvent, 'state' | 'closedAt' | 'closeReason' | 'closeNote' | 'closedBy'>;

/** The closure of an event row (who by name, when, why, the note), or null when it is not closed. */
export function closureOf(e: ClosureFields): ClosureView | null {
	if (e.state !== 'closed' || !e.closedAt) return null;
	const by = e.closedBy ? (db.select({ name: table.user.name }).from(table.user).where(eq(table.user.id, e.closedBy)).get()?.name ?? null) : null;
	return { reason: e.closeReason ?? 'search-complete', note: e.closeNote ?? null, by, at: e.closedAt.toISOString() };
}

/** An instant as ISO 8601 UTC to the second. */
const isoSecond = (iso: string) => iso.replace(/\.\d{3}Z$/, 'Z');

/**
 * The sentence refusing work on a closed event: who closed it, when, why, and what to do.
 * `doing` completes it, e.g. "new pointings are not recorded".
 */
export function closedMessage(closure: ClosureView, doing: string): string {
	return (
		`This event was closed by ${closure.by ?? 'a coordinator'} at ${isoSecond(closure.at)} (${CLOSE_REASON_LABELS[closure.reason].short}): ` +
		`${doing}. Ask a coordinator to reopen it.`
	);
}

/** Work refused because its event is closed: 409 `event_closed`, naming who closed it, when and why. */
export class EventClosed extends DomainError {
	constructor(
		readonly closure: ClosureView,
		doing: string
	) {
		super(409, 'event_closed', closedMessage(closure, doing));
	}
}

/**
 * Refuse new work on a closed event (pointings, claims, candidates, photometry, spectrum takes):
 * throws EventClosed. Takes the event row when the caller has it, else its id (an unknown id passes:
 * the caller answers 404 in its own words). Every later stage asks this before storing anything.
 */
export function assertEventOpen(event: string | ClosureFields, doing: string): void {
	const row = typeof event === 'string' ? db.select().from(table.gwEvent).where(eq(table.gwEvent.id, event)).get() : event;
	if (!row) return;
	const closure = closureOf(row);
	if (closure) throw new EventClosed(closure, doing);
}
