/**
 * What the targets and plan pages show beside the rankings: each telescope's night and its depth
 * check against the event's distance, and the network plan for the next 24 h with what it is
 * expected to cover. Computed on request from the stored rankings; the astronomy is in
 * `lib/targeting` (visibility.ts, night.ts, plan.ts).
 */
import { eq } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { listTelescopes } from '../people/telescopes';
import { eventFields, eventGalaxies, STORED_GALAXIES } from './rankings';
import { depthCheck, type DepthCheck } from '../../targeting/depth.ts';
import type { NetworkPlan, PlanClaim, PlanTarget } from '../../targeting/plan-types.ts';
import { footprintOf, fovAreaDeg2, isWideField, siteOf } from '../../targeting/telescope.ts';
import { tonight } from '../../targeting/visibility.ts';
import { listClaims } from '../coordination/claims';
import type { ObservedFootprint } from '../../targeting/coverage.ts';
import { loadCurrentSkyMap } from '../alerts/skymap-cache';
import { runWork } from '../platform/work-pool';

export type TelescopeRow = ReturnType<typeof listTelescopes>[number];

export interface TelescopeView {
	id: string;
	name: string;
	teamName: string;
	siteName: string;
	kind: 'fields' | 'galaxies';
	fovAreaDeg2: number;
	limitingMag: number;
	minAltitudeDeg: number;
	maxAirmass: number;
	minSunSeparationDeg: number;
	minMoonSeparationDeg: number;
	depth: DepthCheck | null;
	night: {
		date: string;
		sunset: string | null;
		darkStart: string | null;
		darkEnd: string | null;
		sunrise: string | null;
		darkHours: number | null;
		reason: string | null;
		moonIllumination: number;
		moonAltitudeDeg: number;
	};
	fieldCount: number;
}

export function telescopeViews(
	telescopes: TelescopeRow[],
	summary: { distanceMean: number | null; distanceStd: number | null } | null, fieldCounts: Record<string, number>, now: Date): TelescopeView[] {
	return telescopes.map((t) => {
		const night = tonight(siteOf(t), now);
		const d = summary?.distanceMean != null && summary.distanceStd != null ? depthCheck({ distanceMeanMpc: summary.distanceMean, distanceStdMpc: summary.distanceStd, limitingMag: t.limitingMag }) : null;
		return {
			id: t.id,
			name: t.name,
			teamName: t.teamName,
			siteName: t.siteName,
			kind: isWideField(t) ? 'fields' : 'galaxies',
			fovAreaDeg2: fovAreaDeg2(t),
			limitingMag: t.limitingMag,
			minAltitudeDeg: t.minAltitudeDeg,
			maxAirmass: t.maxAirmass,
			minSunSeparationDeg: t.minSunSeparationDeg,
			minMoonSeparationDeg: t.minMoonSeparationDeg,
			depth: d,
			night: {
				date: night.date,
				sunset: night.sunset.evening,
				darkStart: night.darkness?.start ?? null,
				darkEnd: night.darkness?.end ?? null,
				sunrise: night.sunset.morning,
				darkHours: night.darkness?.hours ?? null,
				reason: night.darkness ? null : night.astronomical.reason,
				moonIllumination: night.moon.illumination,
				moonAltitudeDeg: night.moon.altitudeDeg
			},
			fieldCount: fieldCounts[t.id] ?? 0
		};
	});
}

/** Galaxies offered to the plan at most (the best ones; the rest add little probability). */
export const PLAN_GALAXIES = 300;

/**
 * Plan targets carry their kind in the id — `G<galaxy row>` and `<telescope>:<field>` — while claims
 * name the bare galaxy row or field id; this is the way back.
 */
export function claimTargetId(t: { kind: string; targetId: string }): string {
	return t.kind === 'galaxy' ? t.targetId.replace(/^G/, '') : t.targetId.slice(t.targetId.indexOf(':') + 1);
}

/**
 * The network plan for the next `horizonH` hours from `now`: the stored galaxies (narrow fields)
 * and each wide-field telescope's own fields (`lib/targeting/plan.ts`). Open claims bind their
 * target to the claiming telescope (others leave it, reason "claimed"); targets already observed
 * under a completed claim are left out.
 */
export async function networkPlan(
	eventId: string,
	now: Date,
	horizonH = 24
): Promise<{ plan: NetworkPlan; telescopes: TelescopeRow[]; labels: Map<string, string>; claims: ReturnType<typeof listClaims> }> {
	const telescopes = listTelescopes();
	const targets: PlanTarget[] = [];
	for (const g of eventGalaxies(eventId, { limit: Math.min(PLAN_GALAXIES, STORED_GALAXIES) }).galaxies) {
		targets.push({ id: `G${g.galaxyId}`, kind: 'galaxy', name: g.name, raDeg: g.ra, decDeg: g.dec, probability: g.probability });
	}
	for (const f of eventFields(eventId)) {
		targets.push({ id: `${f.telescopeId}:${f.fieldId}`, kind: 'field', name: f.fieldId, raDeg: f.ra, decDeg: f.dec, probability: f.probability, fieldFor: f.telescopeId });
	}
	// Claims name galaxies by row id and fields by field id; the plan's ids carry a prefix.
	const fieldIds = new Map(targets.filter((t) => t.kind === 'field').map((t) => [t.name, t.id]));
	const planId = (kind: string, targetId: string) => (kind === 'galaxy' ? `G${targetId}` : fieldIds.get(targetId));
	const live = listClaims(eventId).filter((c) => c.state === 'claimed' || c.state === 'observing' || c.state === 'done');
	const done = new Set(live.filter((c) => c.state === 'done').map((c) => planId(c.targetKind, c.targetId)));
	const claims: PlanClaim[] = live
		.filter((c) => c.state !== 'done')
		.flatMap((c) => {
			const id = planId(c.targetKind, c.targetId);
			return id ? [{ targetId: id, filter: c.filter || null, epoch: c.epoch, telescopeId: c.telescopeId }] : [];
		});
	// Computed on the work pool: a plan for a large network takes a noticeable time.
	const plan = await runWork('planNetwork', { targets: targets.filter((t) => !done.has(t.id)), telescopes, claims, start: now, horizonH });
	const scopeName = new Map(telescopes.map((t) => [t.id, t.name]));
	const labels = new Map(targets.map((t) => [t.id, t.kind === 'field' ? `${t.name} (${scopeName.get(String(t.fieldFor)) ?? 'field'})` : (t.name ?? t.id)]));
	return { plan, telescopes, labels, claims: live };
}

export interface PlanCoverage {
	/** Sky probability inside the union of every planned exposure's footprint (fields and galaxy pointings). */
	sky: { hours: number; probability: number }[];
	skyTotal: number;
	/** Pixelisation bound on the union (coverage.ts). */
	skyErrorBound: number;
	/** Share of the ranked galaxy probability in the planned galaxies (each galaxy counted once). */
	galaxies: { hours: number; probability: number }[];
	galaxyTotal: number;
	/** Sky probability inside the union of each telescope's own planned footprints. */
	skyByTelescope: Record<string, number>;
}

/**
 * What the plan is expected to cover, without counting any sky twice: the union of the planned
 * footprints on the event's sky map (fields of different tilings and galaxy pointings overlap, so
 * their probabilities cannot be added), and separately the ranked galaxy probability observed.
 */
export async function planCoverage(eventId: string, plan: NetworkPlan, telescopes: TelescopeRow[]): Promise<PlanCoverage | null> {
	const map = (await loadCurrentSkyMap(eventId))?.map;
	if (!map) return null;
	const startMs = Date.parse(plan.start);
	const hoursOf = (ms: number) => (ms - startMs) / 3_600_000;
	const scopes = new Map(telescopes.map((t) => [t.id, t]));
	const footprints: ObservedFootprint[] = [];
	const galaxyPoints: { hours: number; probability: number }[] = [];
	let galaxyTotal = 0;
	const seenGalaxies = new Set<string>();
	const assignments = plan.telescopes.flatMap((t) => t.assignments).sort((a, b) => Date.parse(a.start) - Date.parse(b.start));
	for (const a of assignments) {
		const scope = scopes.get(a.telescopeId);
		if (!scope) continue;
		footprints.push({ id: `${a.telescopeId}:${a.targetId}:${a.start}`, groupId: a.telescopeId, timeMs: Date.parse(a.start), raDeg: a.raDeg, decDeg: a.decDeg, ...footprintOf(scope) });
		if (a.kind === 'galaxy' && !seenGalaxies.has(a.targetId)) {
			seenGalaxies.add(a.targetId);
			galaxyTotal += a.probability;
			galaxyPoints.push({ hours: hoursOf(Date.parse(a.start)), probability: galaxyTotal });
		}
	}
	const union = await runWork('coverage', { map, observed: footprints, options: { pixelsAcross: 8 } });
	return {
		sky: union.curve.map((p) => ({ hours: hoursOf(p.timeMs), probability: p.union })),
		skyTotal: union.union,
		skyErrorBound: union.errorBound,
		galaxies: galaxyPoints,
		galaxyTotal,
		skyByTelescope: Object.fromEntries(union.groups.map((g) => [g.groupId, g.union]))
	};
}

/** The plan's start: `?start=` when the page passes its own (so a download matches it), else now to the minute. */
export function planStart(param: string | null, now = new Date()): Date {
	if (param) {
		const t = Date.parse(param);
		// Only a start near now: a plan is for the coming hours, not an archive.
		if (Number.isFinite(t) && Math.abs(t - now.getTime()) < 36 * 3_600_000) return new Date(t);
	}
	return new Date(Math.floor(now.getTime() / 60_000) * 60_000);
}
