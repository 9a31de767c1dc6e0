/**
 * What the event page's sky view draws: the current map's display raster and contours, the Sun
 * and Moon now, the ranked galaxies and survey fields coloured by claim state (from the viewer's
 * side: their own team's claims stand out), and the completed observations' footprints.
 */
import type { SessionUser } from '../people/auth';
import { skymapDisplay, skymapEventId, skymapVersion } from '../alerts/events';
import { eventFields, eventGalaxies } from './rankings';
import { listClaims } from '../coordination/claims';
import { listCandidates } from '../candidates/candidates';
import { listTelescopes } from '../people/telescopes';
import type { EventCoverage } from '../coordination/event-coverage';
import { isStoredRaster, packRaster } from '../../sky-view/raster-image.ts';
import type { DisplayRaster, FootprintCount, SkyBody, SkyCandidate, SkyContour, SkyFootprint, SkyTarget, TargetState } from '../../sky-view/types.ts';
import { moonPhase, moonPosition, sunPosition } from '../../targeting/sun-moon.ts';
import { footprintOf } from '../../targeting/telescope.ts';
import { positionErrText } from '../../candidates/position.ts';
import { formatProbability } from '../../alerts/display.ts';
import { claimStateAt } from '../../closeout/replay.ts';
import { drawnFootprints } from '../../sky-view/drawn-footprints.ts';
import type { FootprintShape } from '../../targeting/sky-geometry.ts';
import { SKY_FOOTPRINTS_MAX } from '../../limits.ts';

/** Display avoidance radii: the telescope defaults (telescope.min_sun/moon_separation_deg). */
const SUN_AVOID_DEG = 45;
const MOON_AVOID_DEG = 20;
/** Galaxies drawn: the best of the ranking (the table pages through the rest). */
export const SKY_GALAXIES = 500;
/** Fields drawn per wide-field telescope, best first. */
export const SKY_FIELDS_PER_TELESCOPE = 150;

export interface SkyViewData {
	/** The packed display raster inline; null when there is none or when it is fetched from `rasterUrl`. */
	raster: DisplayRaster | null;
	/** Where the browser fetches the same raster (cacheable, one per map); null without a map to draw. */
	rasterUrl: string | null;
	contours: SkyContour[];
	sun: SkyBody;
	moon: SkyBody;
	targets: SkyTarget[];
	footprints: SkyFootprint[];
	candidates: SkyCandidate[];
	/** Pointings behind `footprints`: all of them, the distinct places, and the places drawn. */
	footprintCount: FootprintCount;
}

const pct = formatProbability;

/**
 * Packed rasters and contours of the last few maps: a map's display is written once, when it is
 * analysed, and reading plus packing it costs a few hundred ms (the replay asks for it at every step).
 */
const shown = new Map<string, { raster: DisplayRaster; contours: SkyContour[] }>();
const SHOWN_MAPS = 4;
function mapDisplay(skymapId: string): { raster: DisplayRaster | null; contours: SkyContour[] } {
	// The row's file hash and time tell a rewritten row (a test database reusing an id) from the one cached.
	const key = `${skymapId}|${skymapVersion(skymapId)}`;
	const hit = shown.get(key);
	if (hit) return hit;
	const display = skymapDisplay(skymapId);
	const contours = Array.isArray(display?.contours) ? (display.contours as SkyContour[]) : [];
	if (!isStoredRaster(display)) return { raster: null, contours };
	const packed = { raster: packRaster(display), contours };
	if (shown.size >= SHOWN_MAPS) shown.delete(shown.keys().next().value!);
	shown.set(key, packed);
	return packed;
}

/** The path of a map's display raster (`src/routes/(app)/events/[eventId]/sky/[skymapId]/raster`). */
export function skyRasterUrl(eventId: string, skymapId: string): string {
	return `/events/${encodeURIComponent(eventId)}/sky/${encodeURIComponent(skymapId)}/raster`;
}

/**
 * A map's packed display raster for the browser, with a validator that changes when the stored map
 * does (a rewritten row under the same id). Null when the map is not the event's or has no raster.
 */
export function eventSkyRaster(eventId: string, skymapId: string): { raster: DisplayRaster; etag: string } | null {
	if (skymapEventId(skymapId) !== eventId) return null;
	const { raster } = mapDisplay(skymapId);
	if (!raster) return null;
	const version = skymapVersion(skymapId);
	let h = 0x811c9dc5;
	for (let i = 0; i < version.length; i++) h = Math.imul(h ^ version.charCodeAt(i), 0x01000193) >>> 0;
	return { raster, etag: `"${skymapId.replace(/[^\w-]/g, '')}-${h.toString(16)}"` };
}

/**
 * The footprints drawn for a coverage result. eventCoverage hands out the same object while the
 * map and the pointings are unchanged, so this is worked out once per change, not per page load.
 */
const drawnCache = new WeakMap<EventCoverage, { footprints: SkyFootprint[]; places: number }>();
function drawnOf(covered: EventCoverage): { footprints: SkyFootprint[]; places: number } {
	const hit = drawnCache.get(covered);
	if (hit) return hit;
	const drawn = footprintsForSky(
		covered.footprints.map((f) => ({ ...f, timeMs: Date.parse(f.observedAt) })),
		(f) => f.shape,
		(f) => `${f.teamName} · ${f.telescopeName} · ${f.filter} to ${f.limitingMag.toFixed(1)} mag · ${f.observedAt.slice(11, 16)} UTC`,
		(f) => `Observed: ${pct(f.probability)} of the map inside`
	);
	drawnCache.set(covered, drawn);
	return drawn;
}

/**
 * The sky view for one viewer (the Sun and Moon from `skyBodies`).
 * With `asOf`, claims and candidates are shown as they stood at `now` (the replay; the claim's
 * own times decide, src/lib/closeout/replay.ts), and candidates reported later are left out.
 */
export function eventSky(
	eventId: string,
	skymapId: string | null,
	viewer: SessionUser | null,
	covered: EventCoverage | null,
	now = new Date(),
	o: { asOf?: boolean; inlineRaster?: boolean } = {}
): SkyViewData {
	const display = skymapId ? mapDisplay(skymapId) : { raster: null, contours: [] };

	// The claim a target shows: an open one first, else a finished one; released and lapsed claims free it.
	const atMs = now.getTime();
	const live = o.asOf
		? listClaims(eventId).flatMap((c) => {
				const state = claimStateAt({ claimedAtMs: c.claimedAt.getTime(), startedAtMs: c.startedAt?.getTime() ?? null, doneAtMs: c.doneAt?.getTime() ?? null, endedAtMs: c.endedAt?.getTime() ?? null }, atMs);
				return state ? [{ ...c, state }] : [];
			})
		: listClaims(eventId).filter((c) => c.state !== 'released' && c.state !== 'lapsed');
	const claimOf = new Map<string, (typeof live)[number]>();
	for (const c of live) {
		const key = `${c.targetKind}:${c.targetId}`;
		const held = claimOf.get(key);
		if (!held || (held.state === 'done' && c.state !== 'done')) claimOf.set(key, c);
	}
	const teams = new Set(viewer?.teamIds ?? []);
	const stateOf = (key: string): { state: TargetState; line: string | null; claimId: string | null } => {
		const c = claimOf.get(key);
		if (!c) return { state: 'open', line: null, claimId: null };
		const who = `${c.teamName} · ${c.telescopeName}`;
		if (c.state === 'done') return { state: 'done', line: `observed by ${who}`, claimId: c.id };
		if (c.state === 'observing') return { state: 'observing', line: `being observed by ${who}`, claimId: c.id };
		return { state: teams.has(c.teamId) ? 'mine' : 'claimed', line: `claimed by ${who}`, claimId: c.id };
	};

	const targets: SkyTarget[] = [];
	for (const g of eventGalaxies(eventId, { limit: SKY_GALAXIES }).galaxies) {
		const s = stateOf(`galaxy:${g.galaxyId}`);
		targets.push({
			id: `galaxy:${g.galaxyId}`,
			kind: 'galaxy',
			raDeg: g.ra,
			decDeg: g.dec,
			state: s.state,
			label: `#${g.rank} ${g.name}`,
			details: [`probability ${pct(g.probability)} · ${g.distance.toFixed(0)} ± ${g.distanceErr.toFixed(0)} Mpc`, ...(s.line ? [s.line] : [])]
		});
	}
	const scopes = new Map(listTelescopes().map((t) => [t.id, t]));
	const perScope = new Map<string, number>();
	for (const f of eventFields(eventId)) {
		const n = perScope.get(f.telescopeId) ?? 0;
		const scope = scopes.get(f.telescopeId);
		if (n >= SKY_FIELDS_PER_TELESCOPE || !scope) continue;
		perScope.set(f.telescopeId, n + 1);
		const s = stateOf(`field:${f.fieldId}`);
		targets.push({
			id: `field:${f.fieldId}`,
			kind: 'field',
			raDeg: f.ra,
			decDeg: f.dec,
			state: s.state,
			telescopeId: f.telescopeId,
			footprint: footprintOf(scope),
			label: `${f.fieldId} (${scope.name})`,
			details: [`#${f.rank} for ${scope.name} · probability ${pct(f.probability)}`, ...(s.line ? [s.line] : [])]
		});
	}

	const observed = covered?.footprints ?? [];
	const { footprints, places } = covered ? drawnOf(covered) : { footprints: [], places: 0 };

	const candidates: SkyCandidate[] = listCandidates(eventId)
		.filter((c) => !o.asOf || Date.parse(c.createdAt) <= atMs)
		.map((c) => ({
		id: c.id,
		raDeg: c.raDeg,
		decDeg: c.decDeg,
		label: `Candidate ${c.name}`,
		href: `/events/${eventId}/candidates/${encodeURIComponent(c.name)}`,
		details: [
			`${c.magnitude.toFixed(2)}${c.magnitudeErr != null ? ` ± ${c.magnitudeErr.toFixed(2)}` : ''} mag in ${c.filter}, found ${c.discoveredAt.slice(11, 16)} UTC`,
			`${c.teamName}${c.telescopeName ? ` · ${c.telescopeName}` : ''}`,
			...(c.positionErrArcsec !== null ? [`position uncertainty${positionErrText(c.positionErrArcsec)}`] : []),
			...(c.classification ? [`classified: ${c.classification}`] : []),
			...(c.near.length ? [`within ${c.near[0].separationArcsec.toFixed(1)}″ of ${c.near[0].name}`] : [])
		]
	}));

	return {
		candidates,
		raster: o.inlineRaster === false ? null : display.raster,
		rasterUrl: skymapId && display.raster ? skyRasterUrl(eventId, skymapId) : null,
		contours: display.contours,
		...skyBodies(now),
		targets,
		footprints,
		footprintCount: { pointings: observed.length, places, drawn: footprints.length }
	};
}

/**
 * The Sun and Moon at `now` with their display avoidance radii, topocentric for a reference point on
 * the equator at longitude 0 (the Moon's parallax, at most 1°, is below what the overview shows).
 */
export function skyBodies(now: Date): { sun: SkyBody; moon: SkyBody } {
	const site = { latitudeDeg: 0, longitudeDeg: 0, elevationM: 0 };
	const sun = sunPosition(site, now);
	const moon = moonPosition(site, now);
	return {
		sun: { raDeg: sun.raDeg, decDeg: sun.decDeg, avoidRadiusDeg: SUN_AVOID_DEG },
		moon: { raDeg: moon.raDeg, decDeg: moon.decDeg, avoidRadiusDeg: MOON_AVOID_DEG, illumination: moonPhase(now).illumination }
	};
}

/**
 * Footprints to draw from an event's pointings: one per place (repeats counted in the label), the
 * latest SKY_FOOTPRINTS_MAX places; `group` and `label` give the words of the latest pointing there.
 */
export function footprintsForSky<T extends { id: string; raDeg: number; decDeg: number; timeMs: number }>(
	items: readonly T[],
	shapeOf: (item: T) => FootprintShape,
	group: (item: T) => string,
	label: (item: T) => string
): { footprints: SkyFootprint[]; places: number } {
	const { drawn, places } = drawnFootprints(items, shapeOf, SKY_FOOTPRINTS_MAX);
	return {
		places,
		footprints: drawn.map(({ latest, count }) => ({
			id: latest.id,
			raDeg: latest.raDeg,
			decDeg: latest.decDeg,
			...shapeOf(latest),
			groupId: count > 1 ? `${group(latest)} (latest of ${count} pointings here)` : group(latest),
			label: label(latest)
		}))
	};
}
