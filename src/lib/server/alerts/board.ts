/**
 * What the board and the event page show of an event: its latest state, sky-map summary,
 * notice history and acknowledgement, shaped for the page (plain, serialisable values).
 */
import { and, asc, desc, eq, gt, inArray, notInArray, or, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { ackState, escalateAfterMin, pagesFor, type PageView } from '../duty/paging';
import type { AckView, EventDetail, EventView, PageRow, SkymapView } from '../../event-view';
import { QUIET_ACTIONS } from '../../activity';
import { closureOf } from './events';
import { boardVersion } from '../platform/realtime';
import { versionedCache } from '../platform/versioned-cache';
import { BOARD_CACHE_TTL_MS } from '../../limits.ts';

export type { AckView, EventView, NoticeView, PageRow, SkymapView } from '../../event-view';

/** Retracted events stay on the board this long, so that everyone sees the retraction. */
export const RETRACTED_VISIBLE_MS = 24 * 3600_000;

/** The board's latest messages, newest first, without the quiet ones (progress ticks). */
export function boardActivity(limit = 15) {
	return db
		.select({ seq: table.eventLog.seq, action: table.eventLog.action, actor: table.eventLog.actorLabel, at: table.eventLog.createdAt })
		.from(table.eventLog)
		.where(and(eq(table.eventLog.room, 'board'), notInArray(table.eventLog.action, [...QUIET_ACTIONS])))
		.orderBy(desc(table.eventLog.seq))
		.limit(limit)
		.all()
		.map((r) => ({ ...r, at: r.at.toISOString() }));
}

const iso = (d: Date | null | undefined) => (d ? d.toISOString() : null);

/**
 * The skymap columns the board and the event page use: never `display` (the stored raster and
 * contours, hundreds of kB of JSON per map, read only by the sky view through its own cache).
 */
const mapColumns = {
	id: table.skymap.id,
	noticeId: table.skymap.noticeId,
	summary: table.skymap.summary,
	error: table.skymap.error,
	createdAt: table.skymap.createdAt
};
type MapRow = Pick<table.Skymap, keyof typeof mapColumns>;

function skymapView(row: MapRow | undefined): SkymapView | null {
	if (!row) return null;
	const s = row.summary;
	return {
		noticeId: row.noticeId,
		area50Deg2: s?.area50 ?? null,
		area90Deg2: s?.area90 ?? null,
		area99Deg2: s?.area99 ?? null,
		distanceMeanMpc: s?.distanceMean ?? null,
		distanceStdMpc: s?.distanceStd ?? null,
		peak: s?.peak ? { raDeg: s.peak.ra, decDeg: s.peak.dec } : null,
		warnings: s?.warnings ?? [],
		error: row.error
	};
}

function pageRow(p: PageView): PageRow {
	return {
		id: p.id,
		noticeId: p.noticeId,
		level: p.level,
		to: p.to,
		sentAt: p.sentAt.toISOString(),
		escalatedAt: iso(p.escalatedAt),
		acknowledgedAt: iso(p.acknowledgedAt),
		acknowledgedBy: p.acknowledgedBy,
		latencyS: p.latencyS,
		deliveries: p.deliveries.map((d) => ({ channel: d.channel, status: d.status, attempts: d.attempts, lastError: d.lastError }))
	};
}

function ackView(pages: PageView[]): AckView {
	const a = ackState(pages);
	return { ...a, openSince: iso(a.openSince), acknowledgedAt: iso(a.acknowledgedAt) };
}

function views(events: table.GwEvent[]): { views: EventView[]; pages: Map<string, PageView[]> } {
	const ids = events.map((e) => e.id);
	if (ids.length === 0) return { views: [], pages: new Map() };
	const notices = db
		.select({ notice: table.notice, receivedAt: table.noticeInbox.receivedAt })
		.from(table.notice)
		.leftJoin(table.noticeInbox, eq(table.noticeInbox.id, table.notice.inboxId))
		.where(inArray(table.notice.eventId, ids))
		.orderBy(asc(table.notice.authoredAt))
		.all();
	const maps = db.select(mapColumns).from(table.skymap).where(inArray(table.skymap.eventId, ids)).orderBy(asc(table.skymap.createdAt)).all();
	const mapByNotice = new Map<string, MapRow>();
	for (const m of maps) mapByNotice.set(m.noticeId, m);
	const mapById = new Map(maps.map((m) => [m.id, m]));
	const pages = pagesFor(ids);
	const out = events.map((e): EventView => {
		// The map in force: the event's latest analysed map; a failed map for the latest notice is shown as such.
		const latestMap = e.latestSkymapId ? mapById.get(e.latestSkymapId) : undefined;
		const latestNoticeMap = e.latestNoticeId ? mapByNotice.get(e.latestNoticeId) : undefined;
		const current = skymapView(latestMap ?? latestNoticeMap);
		if (current && latestNoticeMap?.error && latestNoticeMap !== latestMap) current.error = latestNoticeMap.error;
		const ofEvent = notices.filter((n) => n.notice.eventId === e.id);
		// The retraction that made the event retracted is its earliest (ingest.ts, refreshEvent); a
		// closed event keeps it too.
		const retraction = e.retractedAt ? ofEvent.find((n) => n.notice.kind === 'retraction') : undefined;
		const reason = (retraction?.notice.parsed as { reason?: unknown } | undefined)?.reason;
		return {
			id: e.id,
			sourceEventId: e.sourceEventId,
			state: e.state,
			role: e.role,
			eventTime: iso(e.eventTime),
			createdAt: e.createdAt.toISOString(),
			retractedAt: iso(e.retractedAt),
			retractionReason: typeof reason === 'string' && reason ? reason : null,
			closure: closureOf(e),
			latestKind: e.latestKind,
			farHz: e.farHz,
			classification: e.classification,
			properties: e.properties,
			triage: e.triage,
			skymap: current,
			notices: ofEvent.map(({ notice: n, receivedAt }) => {
					const m = mapByNotice.get(n.id);
					return {
						id: n.id,
						kind: n.kind,
						role: n.role,
						authoredAt: n.authoredAt.toISOString(),
						receivedAt: iso(receivedAt),
						farHz: n.farHz,
						classification: n.classification,
						area90Deg2: m?.summary?.area90 ?? null,
						skymapError: m?.error ?? null
					};
				}),
			ack: ackView(pages.get(e.id) ?? [])
		};
	});
	return { views: out, pages };
}

/**
 * Events on the board: every active one and those retracted within the last day, newest merger
 * first (events without a merger time by when they arrived).
 */
export function boardEvents(now = new Date()): EventView[] {
	const rows = db
		.select()
		.from(table.gwEvent)
		.where(
			or(
				eq(table.gwEvent.state, 'active'),
				and(eq(table.gwEvent.state, 'retracted'), gt(table.gwEvent.retractedAt, new Date(now.getTime() - RETRACTED_VISIBLE_MS)))
			)
		)
		.orderBy(desc(sql`coalesce(${table.gwEvent.eventTime}, ${table.gwEvent.createdAt})`), desc(table.gwEvent.createdAt))
		.limit(50)
		.all();
	return views(rows).views;
}

/**
 * The board's events and latest messages, shared by everyone who loads the board until something
 * is logged or another process writes (`boardVersion`), or for BOARD_CACHE_TTL_MS at most
 * (retracted events leave the board by the clock, not by a log entry): a crowd opening the board
 * after a page e-mail costs one read, not one per person.
 */
const boardCache = versionedCache<{ activity: ReturnType<typeof boardActivity>; events: EventView[] }>({ max: 1, ttlMs: BOARD_CACHE_TTL_MS });
export function boardNow() {
	return boardCache.get('board', boardVersion(), () => ({ activity: boardActivity(), events: boardEvents() }));
}

/** Everything known about one event, or null when there is no such event. */
export function eventDetail(eventId: string): EventDetail | null {
	const row = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!row) return null;
	const { views: [view], pages } = views([row]);
	const skymaps = db
		.select(mapColumns)
		.from(table.skymap)
		.where(eq(table.skymap.eventId, eventId))
		.orderBy(asc(table.skymap.createdAt))
		.all()
		.map((m) => ({ ...skymapView(m)!, id: m.id, createdAt: m.createdAt.toISOString() }));
	return { ...view, pages: (pages.get(eventId) ?? []).map(pageRow), escalateAfterMin: escalateAfterMin(), skymaps };
}
