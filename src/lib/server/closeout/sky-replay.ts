/**
 * The event's sky view as it stood at a moment `t` (the replay slider): the sky map current at t,
 * claims as they stood at t, the footprints of pointings recorded by t, and the union coverage of
 * those footprints on that map. Which times count is explained in src/lib/closeout/replay.ts:
 * a map from its notice's receipt, a pointing from when it was recorded (reported to us), a claim
 * from its own claimed/started/done/ended times.
 */
import { asc, count, eq, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { InputError } from '../platform/errors';
import type { SessionUser } from '../people/auth';
import { loadSkyMap } from '../alerts/skymap-cache';
import { runWork } from '../platform/work-pool';
import { eventSky, footprintsForSky, type SkyViewData } from '../targeting/event-sky';
import type { Coverage, ObservedFootprint } from '../../targeting/coverage.ts';
import { footprintOf } from '../../targeting/telescope.ts';
import { pointingsWithOptics } from '../coordination/observations';
import { formatProbability } from '../../alerts/display.ts';
import { changeMoments, claimOpenAt, mapAt, recordedBy, replayRange, thinMoments, type ReplayMap } from '../../closeout/replay.ts';
import { REPLAY_MOMENTS_MAX } from '../../limits.ts';

/** Same edge resolution as the event's coverage figure (event-coverage.ts), so the two agree at the end. */
const PIXELS_ACROSS = 32;

export interface ReplayBounds {
	startMs: number;
	endMs: number;
	/** Moments where something on the map changes (map receipts, claims, pointings), for stepping. */
	moments: number[];
	/** Whether the end is the event's close (else it is now). */
	closed: boolean;
}

export interface SkyAt {
	at: string;
	skymap: { skymapId: string; noticeKind: string; receivedAt: string } | null;
	/** The ranking drawn belongs to a later map than the one current at t. */
	rankingIsLater: boolean;
	sky: SkyViewData;
	counts: { footprints: number; openClaims: number; candidates: number };
	coverage: { union: number; errorBound: number } | null;
	computeMs: number;
}

interface History {
	maps: (ReplayMap & { noticeKind: string })[];
	firstNoticeMs: number | null;
	closedAtMs: number | null;
	observations: { id: string; recordedAtMs: number; raDeg: number; decDeg: number; teamId: string; teamName: string; telescopeName: string; filter: string; limitingMag: number; observedAt: Date; fov: Parameters<typeof footprintOf>[0] }[];
	claims: { claimedAtMs: number; startedAtMs: number | null; doneAtMs: number | null; endedAtMs: number | null }[];
	rankingSkymapId: string | null;
}

/** The event's maps (received, usable) and notice receipts; null when the event does not exist. */
function mapsOf(eventId: string): Pick<History, 'maps' | 'firstNoticeMs' | 'closedAtMs'> | null {
	const event = db.select({ closedAt: table.gwEvent.closedAt, state: table.gwEvent.state }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!event) return null;
	const notices = db
		.select({ id: table.notice.id, kind: table.notice.kind, authoredAt: table.notice.authoredAt, createdAt: table.notice.createdAt, receivedAt: table.noticeInbox.receivedAt })
		.from(table.notice)
		.leftJoin(table.noticeInbox, eq(table.noticeInbox.id, table.notice.inboxId))
		.where(eq(table.notice.eventId, eventId))
		.all();
	const receivedMs = new Map(notices.map((n) => [n.id, (n.receivedAt ?? n.createdAt).getTime()]));
	const maps = db
		.select({ id: table.skymap.id, noticeId: table.skymap.noticeId, filePath: table.skymap.filePath, error: table.skymap.error })
		.from(table.skymap)
		.where(eq(table.skymap.eventId, eventId))
		.all()
		.filter((m) => m.filePath && !m.error)
		.map((m) => {
			const n = notices.find((x) => x.id === m.noticeId)!;
			return { id: m.id, noticeKind: n.kind, receivedAtMs: receivedMs.get(m.noticeId)!, authoredAtMs: n.authoredAt.getTime() };
		});
	return {
		maps,
		firstNoticeMs: notices.length ? Math.min(...notices.map((n) => receivedMs.get(n.id)!)) : null,
		closedAtMs: event.state === 'closed' && event.closedAt ? event.closedAt.getTime() : null
	};
}

function claimTimes(eventId: string): History['claims'] {
	return db
		.select({ claimedAt: table.claim.claimedAt, startedAt: table.claim.startedAt, doneAt: table.claim.doneAt, endedAt: table.claim.endedAt })
		.from(table.claim)
		.where(eq(table.claim.eventId, eventId))
		.all()
		.map((c) => ({ claimedAtMs: c.claimedAt.getTime(), startedAtMs: c.startedAt?.getTime() ?? null, doneAtMs: c.doneAt?.getTime() ?? null, endedAtMs: c.endedAt?.getTime() ?? null }));
}

function history(eventId: string): History | null {
	const base = mapsOf(eventId);
	if (!base) return null;
	// In the order they were reported to us (the replay's clock for footprints).
	const observations = pointingsWithOptics(eventId)
		.map(({ o, ...about }) => ({ ...o, ...about, recordedAtMs: o.createdAt.getTime(), fov: about }))
		.sort((a, b) => a.recordedAtMs - b.recordedAtMs);
	const ranking = db.select({ skymapId: table.eventGalaxy.skymapId }).from(table.eventGalaxy).where(eq(table.eventGalaxy.eventId, eventId)).limit(1).get();
	const rankingField = ranking ? null : db.select({ skymapId: table.eventField.skymapId }).from(table.eventField).where(eq(table.eventField.eventId, eventId)).limit(1).get();
	return {
		...base,
		observations,
		claims: claimTimes(eventId),
		rankingSkymapId: ranking?.skymapId ?? rankingField?.skymapId ?? null
	};
}

/** The replay's range and the moments where the picture changes; null when the event has no notices (or does not exist). */
export function replayBounds(eventId: string, now = new Date()): ReplayBounds | null {
	const h = mapsOf(eventId);
	if (!h) return null;
	const range = replayRange(h.maps, h.firstNoticeMs, h.closedAtMs, now.getTime());
	if (!range) return null;
	// The event page asks for these at every load and an event may hold tens of thousands of
	// pointings: their report times are read once per change (count and latest identify it) and
	// cut to one per slice of the range, which is all thinMoments keeps of them anyway.
	const all = reportTimes(eventId);
	const reported = all.slice(firstPast(all, range.startMs, false), firstPast(all, range.endMs, true));
	const many = reported.length > REPLAY_MOMENTS_MAX;
	const pointingMoments = many ? thinMoments(reported, range, REPLAY_MOMENTS_MAX, { always: true }) : reported;
	const times = [...h.maps.map((m) => m.receivedAtMs), ...pointingMoments, ...claimTimes(eventId).flatMap((c) => [c.claimedAtMs, c.startedAtMs, c.doneAtMs, c.endedAtMs])];
	return { ...range, moments: thinMoments(changeMoments(times, range), range, REPLAY_MOMENTS_MAX, { always: many }), closed: h.closedAtMs !== null };
}

/** Index of the first of ascending `sorted` at or after `t` (strictly after with `after`); its length when none is. */
function firstPast(sorted: readonly number[], t: number, after: boolean): number {
	let lo = 0;
	let hi = sorted.length;
	while (lo < hi) {
		const mid = (lo + hi) >>> 1;
		if (sorted[mid] < t || (after && sorted[mid] === t)) lo = mid + 1;
		else hi = mid;
	}
	return lo;
}

/** Distinct report times of an event's pointings, ascending, cached per (event, count, latest). */
const reportTimesCache = new Map<string, number[]>();
const REPORT_TIMES_CACHE_SIZE = 8;
function reportTimes(eventId: string): number[] {
	const ofEvent = eq(table.observation.eventId, eventId);
	const stat = db.select({ n: count(), latest: sql<number | null>`max(${table.observation.createdAt})` }).from(table.observation).where(ofEvent).get();
	const key = `${eventId}|${stat?.n ?? 0}|${stat?.latest ?? ''}`;
	const hit = reportTimesCache.get(key);
	if (hit) return hit;
	const times = db
		.selectDistinct({ atMs: sql<number>`${table.observation.createdAt}` })
		.from(table.observation)
		.where(ofEvent)
		.orderBy(asc(table.observation.createdAt))
		.all()
		.map((r) => r.atMs);
	if (reportTimesCache.size >= REPORT_TIMES_CACHE_SIZE) reportTimesCache.delete(reportTimesCache.keys().next().value!);
	reportTimesCache.set(key, times);
	return times;
}

/** Coverage results by (map, number of pointings recorded): a replay drags over the same few steps. */
const coverageCache = new Map<string, Coverage>();
const COVERAGE_CACHE_SIZE = 64;

/**
 * The sky view at `at` for one viewer. Refuses a moment outside the event's replay range. Null:
 * no such event. The map is read, and the coverage computed, on the work pool.
 */
export async function skyAt(eventId: string, at: Date, viewer: SessionUser | null, now = new Date()): Promise<SkyAt | null> {
	const t0 = performance.now();
	const h = history(eventId);
	if (!h) return null;
	const range = replayRange(h.maps, h.firstNoticeMs, h.closedAtMs, now.getTime());
	const atMs = at.getTime();
	if (!range) throw new InputError('This event has no notices yet, so there is nothing to replay.', 'at');
	// A minute of slack each side: the page's clock and ours differ a little.
	if (!Number.isFinite(atMs) || atMs < range.startMs - 60_000 || atMs > range.endMs + 60_000)
		throw new InputError(`Choose a moment between ${new Date(range.startMs).toISOString()} and ${new Date(range.endMs).toISOString()}.`, 'at');

	const current = mapAt(h.maps, atMs);
	const recorded = recordedBy(h.observations, atMs);
	const base = eventSky(eventId, current?.id ?? null, viewer, null, at, { asOf: true });
	const rankingIsLater = h.rankingSkymapId !== null && h.rankingSkymapId !== current?.id;

	let cov: Coverage | null = null;
	const map = current ? await loadSkyMap(current.id) : null;
	if (map && current) {
		const key = `${current.id}|${recorded.length}|${recorded.at(-1)?.id ?? ''}`;
		cov = coverageCache.get(key) ?? null;
		if (!cov) {
			const footprints: ObservedFootprint[] = recorded.map((o) => ({ id: o.id, groupId: o.teamId, timeMs: o.observedAt.getTime(), raDeg: o.raDeg, decDeg: o.decDeg, ...footprintOf(o.fov) }));
			cov = await runWork('coverage', { map, observed: footprints, options: { pixelsAcross: PIXELS_ACROSS } });
			if (coverageCache.size >= COVERAGE_CACHE_SIZE) coverageCache.delete(coverageCache.keys().next().value!);
			coverageCache.set(key, cov);
		}
	}
	const own = new Map(cov?.footprints.map((f) => [f.id, f.probability]) ?? []);
	const drawn = footprintsForSky(
		recorded.map((o) => ({ ...o, timeMs: o.recordedAtMs })),
		(o) => footprintOf(o.fov),
		(o) => `${o.teamName} · ${o.telescopeName} · ${o.filter} to ${o.limitingMag.toFixed(1)} mag · ${o.observedAt.toISOString().slice(11, 16)} UTC`,
		(o) => (own.has(o.id) ? `Observed: ${formatProbability(own.get(o.id)!)} of the map inside` : 'Observed')
	);
	const footprintView = { footprints: drawn.footprints, footprintCount: { pointings: recorded.length, places: drawn.places, drawn: drawn.footprints.length } };
	const sky: SkyViewData = {
		...base,
		// Without a map at t the ranking belongs to a later one: show no targets rather than wrong ones.
		targets: current ? base.targets : [],
		...footprintView
	};
	return {
		at: at.toISOString(),
		skymap: current ? { skymapId: current.id, noticeKind: current.noticeKind, receivedAt: new Date(current.receivedAtMs).toISOString() } : null,
		rankingIsLater,
		sky,
		counts: { footprints: recorded.length, openClaims: h.claims.filter((c) => claimOpenAt(c, atMs)).length, candidates: sky.candidates.length },
		coverage: cov ? { union: cov.union, errorBound: cov.errorBound } : null,
		computeMs: performance.now() - t0
	};
}

/** Forget cached replay coverage (tests that rewrite the database in place). */
export function clearReplayCache(): void {
	coverageCache.clear();
	reportTimesCache.clear();
}
