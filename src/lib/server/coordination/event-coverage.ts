/**
 * What the completed observations of an event cover on its CURRENT sky map: the union of their
 * footprints (each reporting telescope's field of view at the reported pointing), overall and per
 * team, as a curve against time since merger, and the share of the ranked galaxy probability
 * observed (the 3-D figure for galaxy-targeted searches). When a new map arrives the same
 * observations are re-evaluated on it, so the figure follows the localisation.
 *
 * The union is `coverage()` (src/lib/targeting/coverage.ts, checked against healpy on committed
 * fixtures); this module gathers the inputs and caches the result per (map, observations).
 *
 * Once per upload, incrementally: observations are append-only, so the union's state is kept per
 * event and map, and when new observations arrive only they are added (`extendCoverage`: the sky
 * they touch is visited, nothing else). An observation earlier than the latest one already
 * counted, a new map, or a removed observation makes it start afresh. The computation runs on the
 * work pool with the map's shared copy (`loadSkyMap`); the event loop only reads rows.
 */
import { and, eq, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { clearSkyMapCache, loadSkyMap } from '../alerts/skymap-cache';
import { runWork } from '../platform/work-pool';
import type { ExtendMode, ObservedFootprint } from '../../targeting/coverage.ts';
import { packFootprints, type PackedCoverageState } from '../platform/work-tasks.ts';
import type { FootprintShape } from '../../targeting/sky-geometry.ts';
import { footprintOf } from '../../targeting/telescope.ts';
import { pointingsWithOptics } from './observations';

/**
 * Edge resolution: pixel side ≤ the footprint's smallest side / 32 (coverage.ts's default). The
 * worst-case bound shrinks with it (at / 8 one 2° field on a 21 deg² map had ±14%); the result is
 * cached per set of observations, so the finer edge costs once per report.
 */
const PIXELS_ACROSS = 32;

export interface ObservedFootprintView {
	id: string;
	raDeg: number;
	decDeg: number;
	shape: FootprintShape;
	teamId: string;
	teamName: string;
	telescopeName: string;
	observedAt: string;
	filter: string;
	limitingMag: number;
	/** Probability inside this footprint alone (overlaps with others counted again). */
	probability: number;
}

export interface TeamCoverage {
	teamId: string;
	teamName: string;
	observations: number;
	/** Probability in the union of this team's footprints. */
	union: number;
	/** Ranked galaxy probability inside this team's footprints or named by its completed claims. */
	galaxyProbability: number;
	/** Union after each of the team's observations: [hours since merger, probability]. */
	curve: [number, number][];
}

export interface EventCoverage {
	skymapId: string;
	observations: number;
	/** Probability in the union of every completed observation's footprint. */
	union: number;
	/** Pixelisation bound on |union − exact union| (coverage.ts). */
	errorBound: number;
	/** Σ of each footprint's own probability: what a naive sum would claim (≥ union). */
	sumOfFootprints: number;
	/** Union after each observation: [hours since merger, probability]. */
	curve: [number, number][];
	/** Share of the ranked galaxy probability observed, after each observation. */
	galaxyCurve: [number, number][];
	teams: TeamCoverage[];
	galaxies: { ranked: number; observedCount: number; probability: number } | null;
	footprints: ObservedFootprintView[];
	mergerTime: string | null;
	computeMs: number;
	/** How the union was brought up to date: extended by the new observations, or computed afresh. */
	update: ExtendMode;
}

let resultCache: { key: string; value: EventCoverage } | null = null;
/** Computations under way, by key: page loads that arrive together wait for the same one. */
const pending = new Map<string, Promise<EventCoverage | null>>();

/** Union states kept (the events being followed now); the least recently used dropped first. */
const KEPT_STATES = 8;
type RowView = Omit<ObservedFootprintView, 'probability'> & { timeMs: number };
interface KeptState {
	skymapId: string;
	/** The observations in the state, in its input order, and the last row id read. */
	rows: RowView[];
	lastRowId: number;
	state: PackedCoverageState;
}
const unionStates = new Map<string, KeptState>();

/** Coverage of an event's completed observations on its current map; null without a usable map. */
export async function eventCoverage(eventId: string): Promise<EventCoverage | null> {
	const event = db.select({ skymapId: table.gwEvent.latestSkymapId, eventTime: table.gwEvent.eventTime }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!event?.skymapId) return null;
	const sky = db.select({ id: table.skymap.id, filePath: table.skymap.filePath, error: table.skymap.error }).from(table.skymap).where(eq(table.skymap.id, event.skymapId)).get();
	if (!sky?.filePath || sky.error) return null;

	// Observations are append-only: the map, how many observations and done galaxy claims there are,
	// and how many galaxies are ranked identify the inputs, so a page load that hits the cache reads
	// counts only.
	const count = (t: typeof table.observation | typeof table.claim | typeof table.eventGalaxy, where: ReturnType<typeof and>) =>
		db.select({ n: sql<number>`count(*)` }).from(t).where(where).get()?.n ?? 0;
	const doneGalaxy = and(eq(table.claim.eventId, eventId), eq(table.claim.targetKind, 'galaxy'), eq(table.claim.state, 'done'));
	const rankedCount = count(table.eventGalaxy, eq(table.eventGalaxy.eventId, eventId));
	const observationCount = count(table.observation, eq(table.observation.eventId, eventId));
	const key = [sky.id, observationCount, count(table.claim, doneGalaxy), rankedCount].join('|');
	if (resultCache?.key === key) return resultCache.value;
	const running = pending.get(key);
	if (running) return running;
	const work = compute(eventId, key, sky.id, event.eventTime, observationCount, rankedCount, doneGalaxy);
	pending.set(key, work);
	try {
		return await work;
	} finally {
		pending.delete(key);
	}
}

async function compute(
	eventId: string,
	key: string,
	skymapId: string,
	eventTime: Date | null,
	observationCount: number,
	rankedCount: number,
	doneGalaxy: ReturnType<typeof and>
): Promise<EventCoverage | null> {
	const t0 = performance.now();
	const map = await loadSkyMap(skymapId);
	if (!map) return null;
	// The kept state when it is this map's; then only the rows stored since are read. Observations
	// are append-only: a count that does not add up (one removed) means starting afresh.
	let kept = unionStates.get(eventId) ?? null;
	if (kept && kept.skymapId !== skymapId) kept = null;
	let read = pointingsWithOptics(eventId, kept?.lastRowId);
	if (kept && kept.rows.length + read.length !== observationCount) {
		kept = null;
		read = pointingsWithOptics(eventId);
	}
	const fresh = kept === null;
	const newRows: RowView[] = read.map(({ rowId: _rowId, o, teamName, telescopeName, ...optics }) => ({
		id: o.id,
		raDeg: o.raDeg,
		decDeg: o.decDeg,
		shape: footprintOf(optics),
		teamId: o.teamId,
		teamName,
		telescopeName,
		observedAt: o.observedAt.toISOString(),
		timeMs: o.observedAt.getTime(),
		filter: o.filter,
		limitingMag: o.limitingMag
	}));
	const lastRowId = read.reduce((m, r) => Math.max(m, r.rowId), kept?.lastRowId ?? 0);
	const rows = fresh ? newRows : [...kept!.rows, ...newRows];

	const doneGalaxyClaims = db
		.select({ targetId: table.claim.targetId, teamId: table.claim.teamId, teamName: table.team.name })
		.from(table.claim)
		.innerJoin(table.team, eq(table.team.id, table.claim.teamId))
		.where(doneGalaxy)
		.all();
	let galaxyInput: { ranked: { id: string; ra: number; dec: number; probability: number }[]; claims: { targetId: string; teamId: string }[]; teamIds: string[] } | null = null;
	if (rankedCount > 0) {
		const ranked = db
			.select({ id: table.eventGalaxy.galaxyId, ra: table.galaxy.raDeg, dec: table.galaxy.decDeg, probability: table.eventGalaxy.probability })
			.from(table.eventGalaxy)
			.innerJoin(table.galaxy, eq(table.galaxy.id, table.eventGalaxy.galaxyId))
			.where(eq(table.eventGalaxy.eventId, eventId))
			.all()
			.map((g) => ({ ...g, id: String(g.id) }));
		const teamIds = [...new Set([...rows, ...doneGalaxyClaims].map((r) => r.teamId))];
		galaxyInput = { ranked, claims: doneGalaxyClaims.map((c) => ({ targetId: c.targetId, teamId: c.teamId })), teamIds };
	}

	const mergerMs = eventTime ? eventTime.getTime() : null;
	const hours = (ms: number) => (mergerMs === null ? ms / 3_600_000 : (ms - mergerMs) / 3_600_000);
	const added = packFootprints(newRows.map((r): ObservedFootprint => ({ id: r.id, groupId: r.teamId, timeMs: r.timeMs, raDeg: r.raDeg, decDeg: r.decDeg, ...r.shape })));
	const out = await runWork('eventCoverage', {
		map,
		state: fresh ? null : kept!.state,
		added,
		options: { pixelsAcross: PIXELS_ACROSS, mergerTimeMs: mergerMs ?? undefined },
		galaxies: galaxyInput
	});
	unionStates.delete(eventId);
	unionStates.set(eventId, { skymapId, rows, lastRowId, state: out.state });
	while (unionStates.size > KEPT_STATES) unionStates.delete(unionStates.keys().next().value!);

	// Time order (ties in input order), as coverage() ranks them.
	const order = Int32Array.from(rows.keys());
	if (rows.some((r, i) => i > 0 && r.timeMs < rows[i - 1].timeMs)) order.sort((a, b) => rows[a].timeMs - rows[b].timeMs || a - b);

	let galaxies: EventCoverage['galaxies'] = null;
	let galaxyCurve: [number, number][] = [];
	const galaxyByTeam = new Map<string, number>(out.galaxies?.byTeam ?? []);
	if (out.galaxies) {
		const gc = out.galaxies;
		// Stored probabilities are normalised over every candidate of the ranking, so the observed
		// sum is already the fraction of the whole ranked probability (not just of the stored top).
		galaxies = { ranked: rankedCount, observedCount: gc.observedCount, probability: gc.observedProbability };
		galaxyCurve = gc.curve.map(([ms, p]) => [hours(ms), p]);
	}

	const teamCurves = new Map<string, [number, number][]>();
	for (const i of order) {
		const r = rows[i];
		let c = teamCurves.get(r.teamId);
		if (!c) teamCurves.set(r.teamId, (c = []));
		c.push([hours(r.timeMs), out.groupCurveByInput[i]]);
	}
	const teamNames = new Map([...rows, ...doneGalaxyClaims].map((r) => [r.teamId, r.teamName]));
	const teams: TeamCoverage[] = [...teamNames].map(([teamId, teamName]) => {
		const g = out.groups.find((x) => x.groupId === teamId);
		return {
			teamId,
			teamName,
			observations: g?.observations ?? 0,
			union: g?.union ?? 0,
			galaxyProbability: galaxyByTeam.get(teamId) ?? 0,
			curve: teamCurves.get(teamId) ?? []
		};
	});
	teams.sort((a, b) => b.union - a.union || a.teamName.localeCompare(b.teamName));

	const value: EventCoverage = {
		skymapId,
		observations: rows.length,
		union: out.union,
		errorBound: out.errorBound,
		sumOfFootprints: out.sumOfFootprints,
		curve: Array.from(order, (i): [number, number] => [hours(rows[i].timeMs), out.curveByInput[i]]),
		galaxyCurve,
		teams,
		galaxies,
		// In the order the rows are read (time order), whatever order the state holds them in.
		footprints: Array.from(order, (i) => {
			const { timeMs: _t, ...view } = rows[i];
			return { ...view, probability: out.ownByInput[i] };
		}),
		mergerTime: eventTime?.toISOString() ?? null,
		computeMs: performance.now() - t0,
		update: fresh ? 'recomputed' : out.mode
	};
	resultCache = { key, value };
	return value;
}

/** Forget cached maps and results (tests that rewrite the database in place). */
export function clearCoverageCache(): void {
	clearSkyMapCache();
	resultCache = null;
	unionStates.clear();
}
