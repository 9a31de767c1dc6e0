/**
 * What the completed observations of an event cover on its CURRENT sky map: the union of their
 * footprints (each reporting telescope's field of view at the reported pointing), overall and per
 * team, as a curve against time since merger, and the share of the ranked galaxy probability
 * observed (the 3-D figure for galaxy-targeted searches). When a new map arrives the same
 * observations are re-evaluated on it, so the figure follows the localisation.
 *
 * The union is `coverage()` (src/lib/targeting/coverage.ts, checked against healpy on committed
 * fixtures); this module only gathers the inputs and caches the result per (map, observations).
 */
import { and, eq, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { clearSkyMapCache, skyMapById } from '../alerts/skymap-cache';
import { coverage, galaxyCoverage, type ObservedFootprint } from '../../targeting/coverage.ts';
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
}

let resultCache: { key: string; value: EventCoverage } | null = null;

/** Coverage of an event's completed observations on its current map; null without a usable map. */
export function eventCoverage(eventId: string): EventCoverage | null {
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
	const key = [sky.id, count(table.observation, eq(table.observation.eventId, eventId)), count(table.claim, doneGalaxy), rankedCount].join('|');
	if (resultCache?.key === key) return resultCache.value;

	const rows = pointingsWithOptics(eventId).map(({ o, ...about }) => ({ ...o, ...about }));
	const doneGalaxyClaims = db
		.select({ targetId: table.claim.targetId, teamId: table.claim.teamId, teamName: table.team.name })
		.from(table.claim)
		.innerJoin(table.team, eq(table.team.id, table.claim.teamId))
		.where(doneGalaxy)
		.all();

	const t0 = performance.now();
	const map = skyMapById(sky.id);
	if (!map) return null;
	const mergerMs = event.eventTime ? event.eventTime.getTime() : null;
	const hours = (ms: number) => (mergerMs === null ? ms / 3_600_000 : (ms - mergerMs) / 3_600_000);
	const footprints: ObservedFootprint[] = rows.map((r) => ({ id: r.id, groupId: r.teamId, timeMs: r.observedAt.getTime(), raDeg: r.raDeg, decDeg: r.decDeg, ...footprintOf(r) }));
	const union = coverage(map, footprints, { pixelsAcross: PIXELS_ACROSS, mergerTimeMs: mergerMs ?? undefined });

	let galaxies: EventCoverage['galaxies'] = null;
	let galaxyCurve: [number, number][] = [];
	const galaxyByTeam = new Map<string, number>();
	if (rankedCount > 0) {
		const ranked = db
			.select({ id: table.eventGalaxy.galaxyId, ra: table.galaxy.raDeg, dec: table.galaxy.decDeg, probability: table.eventGalaxy.probability })
			.from(table.eventGalaxy)
			.innerJoin(table.galaxy, eq(table.galaxy.id, table.eventGalaxy.galaxyId))
			.where(eq(table.eventGalaxy.eventId, eventId))
			.all()
			.map((g) => ({ ...g, id: String(g.id) }));
		const gc = galaxyCoverage(ranked, { galaxyIds: doneGalaxyClaims.map((c) => c.targetId), footprints });
		// Stored probabilities are normalised over every candidate of the ranking, so the observed
		// sum is already the fraction of the whole ranked probability (not just of the stored top).
		galaxies = { ranked: rankedCount, observedCount: gc.observedCount, probability: gc.observedProbability };
		galaxyCurve = gc.curve.map((p) => [hours(p.timeMs), p.probability]);
		// Per team: galaxies inside its own footprints or named by its own completed claims, each once.
		for (const teamId of new Set([...rows, ...doneGalaxyClaims].map((r) => r.teamId))) {
			const own = galaxyCoverage(ranked, {
				galaxyIds: doneGalaxyClaims.filter((c) => c.teamId === teamId).map((c) => c.targetId),
				footprints: footprints.filter((f) => f.groupId === teamId)
			});
			galaxyByTeam.set(teamId, own.observedProbability);
		}
	}

	const teamNames = new Map([...rows, ...doneGalaxyClaims].map((r) => [r.teamId, r.teamName]));
	const teams: TeamCoverage[] = [...teamNames].map(([teamId, teamName]) => {
		const g = union.groups.find((x) => x.groupId === teamId);
		return {
			teamId,
			teamName,
			observations: g?.observations ?? 0,
			union: g?.union ?? 0,
			galaxyProbability: galaxyByTeam.get(teamId) ?? 0,
			curve: (g?.curve ?? []).map((p) => [hours(p.timeMs), p.union] as [number, number])
		};
	});
	teams.sort((a, b) => b.union - a.union || a.teamName.localeCompare(b.teamName));

	const own = new Map(union.footprints.map((f) => [f.id, f.probability]));
	const value: EventCoverage = {
		skymapId: sky.id,
		observations: rows.length,
		union: union.union,
		errorBound: union.errorBound,
		sumOfFootprints: union.sumOfFootprints,
		curve: union.curve.map((p) => [hours(p.timeMs), p.union]),
		galaxyCurve,
		teams,
		galaxies,
		footprints: rows.map((r) => ({
			id: r.id,
			raDeg: r.raDeg,
			decDeg: r.decDeg,
			shape: footprintOf(r),
			teamId: r.teamId,
			teamName: r.teamName,
			telescopeName: r.telescopeName,
			observedAt: r.observedAt.toISOString(),
			filter: r.filter,
			limitingMag: r.limitingMag,
			probability: own.get(r.id) ?? 0
		})),
		mergerTime: event.eventTime?.toISOString() ?? null,
		computeMs: performance.now() - t0
	};
	resultCache = { key, value };
	return value;
}

/** Forget cached maps and results (tests that rewrite the database in place). */
export function clearCoverageCache(): void {
	clearSkyMapCache();
	resultCache = null;
}
