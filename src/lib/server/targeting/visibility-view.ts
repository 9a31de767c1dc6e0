/**
 * What the targets and plan pages show beside the rankings: each telescope's night, its depth
 * check against the event's distance, per-target visibility now and tonight, and the network
 * plan for the next 24 h. Computed on request from the stored rankings (cheap: a page of targets).
 */
import { eq } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { listTelescopes } from '../people/telescopes';
import { eventFields, eventGalaxies, isWideField, fovAreaDeg2, STORED_GALAXIES } from './rankings';
import {
	moonSeparationDeg,
	nightWindow,
	observableWindow,
	sunAvoidance,
	targetAltAz,
	type NightInfo,
	type Site
} from '../../targeting/night.ts';
import { depthCheck, type DepthCheck } from '../../targeting/depth.ts';
import { planNetwork, type NetworkPlan, type PlanClaim, type PlanTarget } from '../../targeting/plan.ts';
import { listClaims } from '../coordination/claims';
import { coverage, type ObservedFootprint } from '../../targeting/coverage.ts';
import { readSkyMap } from '../../sky/index.ts';
import { readStoredFile } from '../platform/storage';

export type TelescopeRow = ReturnType<typeof listTelescopes>[number];

export function siteOf(t: Pick<table.Telescope, 'latitudeDeg' | 'longitudeDeg' | 'elevationM'>): Site {
	return { latitudeDeg: t.latitudeDeg, longitudeDeg: t.longitudeDeg, elevationM: t.elevationM };
}

function ymd(ms: number): string {
	return new Date(ms).toISOString().slice(0, 10);
}

/**
 * Tonight at a site: the night of the local mean-solar date 12 h before now (so that after
 * midnight it is still the night in progress), or the next one once that night's darkness (or,
 * without darkness, its sunrise) has passed.
 */
export function tonight(site: Site, now: Date): NightInfo {
	const localMs = now.getTime() + (site.longitudeDeg / 15) * 3_600_000;
	const night = nightWindow(site, ymd(localMs - 12 * 3_600_000));
	const over = night.darkness?.end ?? night.sunset.morning ?? night.windowEnd;
	return Date.parse(over) < now.getTime() ? nightWindow(site, ymd(localMs + 12 * 3_600_000)) : night;
}

/**
 * Lowest altitude a telescope may point at: its altitude limit, or the altitude of its airmass
 * limit by the plane-parallel secant law X = 1 / sin(alt) when that is higher (common practice).
 */
export function effectiveMinAltitudeDeg(t: Pick<table.Telescope, 'minAltitudeDeg' | 'maxAirmass'>): number {
	const fromAirmass = t.maxAirmass > 1 ? (Math.asin(1 / t.maxAirmass) * 180) / Math.PI : 90;
	return Math.max(t.minAltitudeDeg, fromAirmass);
}

export interface Visibility {
	altitudeDeg: number;
	airmass: number | null;
	/** Above the limit at this moment (and dark). */
	upNow: boolean;
	/** When it is next above the limit in darkness tonight (the start of the first interval not yet over). */
	from: string | null;
	until: string | null;
	fromBy: 'darkness' | 'rise' | null;
	/** Why it is not observable tonight. */
	reason: string | null;
	moonSepDeg: number;
	sunElongationDeg: number;
	/** Refused by the Sun-avoidance limit, with the reason. */
	sunDropped: string | null;
}

export function visibility(t: TelescopeRow, night: NightInfo, target: { raDeg: number; decDeg: number }, now: Date): Visibility {
	const site = siteOf(t);
	const here = targetAltAz(site, target, now);
	const minAlt = effectiveMinAltitudeDeg(t);
	const sun = sunAvoidance(target, now, t.minSunSeparationDeg);
	const win = observableWindow(site, target, night, minAlt);
	const next = win.intervals.find((i) => Date.parse(i.end) > now.getTime()) ?? null;
	const upNow = next !== null && Date.parse(next.start) <= now.getTime();
	return {
		altitudeDeg: here.geometricAltitudeDeg,
		airmass: here.airmass,
		upNow,
		from: next?.start ?? null,
		until: next?.end ?? null,
		fromBy: next?.startsBy ?? null,
		reason: next
			? null
			: !night.darkness
				? 'no darkness tonight'
				: win.intervals.length
					? `set below ${minAlt.toFixed(0)}° for tonight`
					: `below ${minAlt.toFixed(0)}° all night (highest ${win.maxAltitudeDeg?.toFixed(0)}°)`,
		moonSepDeg: moonSeparationDeg(site, target, now),
		sunElongationDeg: sun.elongationDeg,
		sunDropped: sun.ok ? null : `dropped for Sun avoidance: ${sun.reason}`
	};
}

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

export function tonightFor(t: TelescopeRow, now: Date): NightInfo {
	return tonight(siteOf(t), now);
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
export function networkPlan(
	eventId: string,
	now: Date,
	horizonH = 24
): { plan: NetworkPlan; telescopes: TelescopeRow[]; labels: Map<string, string>; claims: ReturnType<typeof listClaims> } {
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
	const plan = planNetwork({ targets: targets.filter((t) => !done.has(t.id)), telescopes, claims, start: now, horizonH });
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
export function planCoverage(eventId: string, plan: NetworkPlan, telescopes: TelescopeRow[]): PlanCoverage | null {
	const event = db.select({ skymapId: table.gwEvent.latestSkymapId, eventTime: table.gwEvent.eventTime }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	const sky = event?.skymapId ? db.select().from(table.skymap).where(eq(table.skymap.id, event.skymapId)).get() : null;
	if (!sky?.filePath || sky.error) return null;
	const bytes = readStoredFile(sky.filePath);
	const map = readSkyMap(new Uint8Array(bytes.buffer, bytes.byteOffset, bytes.byteLength));
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
		const shape =
			scope.fovShape === 'circle'
				? ({ shape: 'circle', diameterDeg: scope.fovWidthDeg } as const)
				: ({ shape: 'rectangle', widthDeg: scope.fovWidthDeg, heightDeg: scope.fovHeightDeg } as const);
		footprints.push({ id: `${a.telescopeId}:${a.targetId}:${a.start}`, groupId: a.telescopeId, timeMs: Date.parse(a.start), raDeg: a.raDeg, decDeg: a.decDeg, ...shape });
		if (a.kind === 'galaxy' && !seenGalaxies.has(a.targetId)) {
			seenGalaxies.add(a.targetId);
			galaxyTotal += a.probability;
			galaxyPoints.push({ hours: hoursOf(Date.parse(a.start)), probability: galaxyTotal });
		}
	}
	const union = coverage(map, footprints, { pixelsAcross: 8 });
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
