/**
 * Filters of the ranked target tables ("observable now", unclaimed, by team) and the data of the
 * targets page, built so that 10⁴ stored galaxies filter, sort and page within a request.
 *
 * "Observable now" over every stored row cannot afford the per-target rise/set search of
 * `visibility()` (an observable window is a few dozen altitude evaluations per target). It is
 * the same test evaluated at one instant only: darkness now (once per request), then per target
 * the geometric altitude from the hour-angle formula
 *   sin h = sin φ sin δ + cos φ cos δ cos H,   H = LAST − α   (Meeus, Astronomical Algorithms, 2nd ed., eq. 13.6)
 * on the apparent place of date (annual aberration, then precession–nutation as one matrix, both
 * computed once per request with astronomy-engine, as `targetAltAz` in night.ts does per target),
 * and the solar elongation from one dot product with the Sun's direction. The full `visibility()`
 * then runs for the rows of the page only.
 */
import { BaryState, Body, GeoVector, MakeTime, Rotation_EQJ_EQD } from 'astronomy-engine';
import type { SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import * as claims from '../coordination/claims';
import { getEvent } from '../alerts/events';
import { listTelescopes } from '../people/telescopes';
import { eventFieldsPage, eventGalaxies, FIELD_SORTS, GALAXY_SORTS, MAX_FIELDS, STORED_GALAXIES, targetsMeta, type FieldSort, type GalaxySort, type TargetFilter } from './rankings';
import { effectiveMinAltitudeDeg, telescopeViews, tonightFor, visibility, type TelescopeRow } from './visibility-view';
import { localSiderealTimeHours, sunAvoidance, type NightInfo } from '../../targeting/night.ts';
import { DISTANCE_OUTLIER_P } from '../../targeting/galaxies.ts';

const DEG = Math.PI / 180;
/** Speed of light in AU per day (IAU 2012 au, c = 299 792.458 km/s), as night.ts uses it. */
const C_AU_PER_DAY = 173.144632674;

/** Rows per page in both tables. */
export const PAGE_SIZE = 25;

// ─── The sky at one instant, for many targets ───

export interface SkyNow {
	latitudeDeg: number;
	/** Local apparent sidereal time, degrees. */
	lastDeg: number;
	/** Earth's barycentric velocity / c on J2000 axes (annual aberration). */
	beta: [number, number, number];
	/** J2000 → equator and equinox of date (precession + nutation), astronomy-engine's layout rot[i][j]. */
	rot: number[][];
	/** Geocentric apparent unit vector of the Sun on J2000 axes. */
	sun: [number, number, number];
	/** Astronomical darkness at this instant (per the telescope's night). */
	dark: boolean;
	minAltitudeDeg: number;
	minSunSeparationDeg: number;
}

/** Everything the per-target test needs that does not depend on the target: computed once. */
export function skyNow(t: Pick<TelescopeRow, 'latitudeDeg' | 'longitudeDeg' | 'minAltitudeDeg' | 'maxAirmass' | 'minSunSeparationDeg'>, night: NightInfo | null, now: Date): SkyNow {
	const time = MakeTime(now);
	const earth = BaryState(Body.Earth, time);
	const s = GeoVector(Body.Sun, time, true);
	const r = Math.hypot(s.x, s.y, s.z);
	const lon = t.longitudeDeg > 180 ? t.longitudeDeg - 360 : t.longitudeDeg;
	const darkness = night?.darkness ?? null;
	const nowMs = now.getTime();
	return {
		latitudeDeg: t.latitudeDeg,
		lastDeg: localSiderealTimeHours(now, lon, 'apparent') * 15,
		beta: [earth.vx / C_AU_PER_DAY, earth.vy / C_AU_PER_DAY, earth.vz / C_AU_PER_DAY],
		rot: Rotation_EQJ_EQD(time).rot,
		sun: [s.x / r, s.y / r, s.z / r],
		dark: Boolean(darkness && Date.parse(darkness.start) <= nowMs && nowMs < Date.parse(darkness.end)),
		minAltitudeDeg: effectiveMinAltitudeDeg(t),
		minSunSeparationDeg: t.minSunSeparationDeg
	};
}

/**
 * Geometric topocentric altitude (degrees) and solar elongation (degrees) of many fixed ICRS
 * directions at the instant of `sky`: the hour-angle formula above on the apparent place of date.
 * A distant source has no parallax, so geocentric and topocentric directions agree.
 */
export function altitudesNow(sky: SkyNow, raDeg: Float64Array, decDeg: Float64Array): { altitudeDeg: Float64Array; sunSeparationDeg: Float64Array } {
	const n = raDeg.length;
	const altitudeDeg = new Float64Array(n);
	const sunSeparationDeg = new Float64Array(n);
	const [bx, by, bz] = sky.beta;
	const m = sky.rot;
	const sinLat = Math.sin(sky.latitudeDeg * DEG);
	const cosLat = Math.cos(sky.latitudeDeg * DEG);
	const last = sky.lastDeg * DEG;
	const [sx, sy, sz] = sky.sun;
	for (let k = 0; k < n; k++) {
		const ra = raDeg[k] * DEG;
		const dec = decDeg[k] * DEG;
		const cd = Math.cos(dec);
		const ux = cd * Math.cos(ra);
		const uy = cd * Math.sin(ra);
		const uz = Math.sin(dec);
		// Annual aberration to first order in v/c, u' = u + β − (u·β) u, renormalised (as night.ts).
		const dot = ux * bx + uy * by + uz * bz;
		let x = ux + bx - dot * ux;
		let y = uy + by - dot * uy;
		let z = uz + bz - dot * uz;
		const r = Math.hypot(x, y, z);
		x /= r;
		y /= r;
		z /= r;
		const cosSun = Math.min(1, Math.max(-1, x * sx + y * sy + z * sz));
		sunSeparationDeg[k] = Math.acos(cosSun) / DEG;
		// Of date: v = rotᵀ u (astronomy-engine's RotateVector convention).
		const vx = m[0][0] * x + m[1][0] * y + m[2][0] * z;
		const vy = m[0][1] * x + m[1][1] * y + m[2][1] * z;
		const vz = m[0][2] * x + m[1][2] * y + m[2][2] * z;
		const sinDec = Math.min(1, Math.max(-1, vz));
		const cosDec = Math.hypot(vx, vy);
		const hourAngle = last - Math.atan2(vy, vx);
		const sinAlt = sinLat * sinDec + cosLat * cosDec * Math.cos(hourAngle);
		altitudeDeg[k] = Math.asin(Math.min(1, Math.max(-1, sinAlt))) / DEG;
	}
	return { altitudeDeg, sunSeparationDeg };
}

/**
 * 1 where the telescope can observe the target at this instant: dark now, geometric altitude at or
 * above the telescope's effective limit (altitude limit or the airmass limit's altitude, the test
 * behind the row's "up now"), and not refused by Sun avoidance.
 */
export function observableNowMask(sky: SkyNow, raDeg: Float64Array, decDeg: Float64Array): Uint8Array {
	const out = new Uint8Array(raDeg.length);
	if (!sky.dark) return out;
	const { altitudeDeg, sunSeparationDeg } = altitudesNow(sky, raDeg, decDeg);
	for (let k = 0; k < out.length; k++) out[k] = altitudeDeg[k] >= sky.minAltitudeDeg && sunSeparationDeg[k] >= sky.minSunSeparationDeg ? 1 : 0;
	return out;
}

// ─── The query string ───

export interface TargetQuery {
	observableNow: boolean;
	unclaimed: boolean;
	teamId: string | null;
	telescopeId: string | null;
	galaxies: { page: number; sort: GalaxySort; dir: 'asc' | 'desc' };
	fields: { page: number; sort: FieldSort; dir: 'asc' | 'desc' };
}

/**
 * A page number from the query: a whole number from 1 to `lastPage`. Anything else an edited link
 * may carry (1e309, -4, 2.5, "x", 10^20) becomes the nearest page that exists (fractions round down,
 * non-numbers give the first page), so the offset handed to the database is always a small integer.
 */
export function pageNumber(v: string | null, lastPage: number): number {
	const n = Number(v);
	if (v === null || v.trim() === '' || Number.isNaN(n) || n < 1) return 1;
	return Math.max(1, Math.min(lastPage, Math.floor(n)));
}
/** Most pages a table can have: its stored rows at most, a page at a time. */
const LAST_GALAXY_PAGE = Math.ceil(STORED_GALAXIES / PAGE_SIZE);
const LAST_FIELD_PAGE = Math.ceil(MAX_FIELDS / PAGE_SIZE);
const pick = <T extends string>(allowed: readonly T[], v: string | null, fallback: T): T => ((allowed as readonly string[]).includes(v ?? '') ? (v as T) : fallback);

/**
 * Filters and paging from the page's query string: `observable=now`, `claim=unclaimed`,
 * `team=ID`, `telescope=ID`; galaxies `page`/`sort`/`dir`, fields `fpage`/`fsort`/`fdir`.
 * Unknown values are ignored, so an edited link still shows a page.
 */
export function parseTargetQuery(q: URLSearchParams): TargetQuery {
	return {
		observableNow: q.get('observable') === 'now',
		unclaimed: q.get('claim') === 'unclaimed',
		teamId: q.get('team') || null,
		telescopeId: q.get('telescope') || null,
		galaxies: { page: pageNumber(q.get('page'), LAST_GALAXY_PAGE), sort: pick(GALAXY_SORTS, q.get('sort'), 'rank'), dir: q.get('dir') === 'desc' ? 'desc' : 'asc' },
		fields: { page: pageNumber(q.get('fpage'), LAST_FIELD_PAGE), sort: pick(FIELD_SORTS, q.get('fsort'), 'rank'), dir: q.get('fdir') === 'desc' ? 'desc' : 'asc' }
	};
}

// ─── The page ───

const paging = (page: number, total: number, sort: string, dir: string) => ({ page, pageSize: PAGE_SIZE, total, pages: Math.max(1, Math.ceil(total / PAGE_SIZE)), sort, dir });

/**
 * Everything the targets page shows, for one person at one instant (the body of its load
 * function, kept here so it can be timed and tested without SvelteKit). Null: no such event.
 */
export function targetsPageData(eventId: string, query: TargetQuery, user: SessionUser | null, now = new Date()) {
	const event = getEvent(eventId);
	if (!event) return null;
	const meta = targetsMeta(event.eventId);
	const telescopes = listTelescopes();
	const summary = event.skymap ? { distanceMean: event.skymap.distanceMean, distanceStd: event.skymap.distanceStd } : null;
	const views = telescopeViews(telescopes, summary, meta?.fieldCounts ?? {}, now);

	// Visibility is for one telescope at a time (its site, limits and tonight): one of the looker's
	// own team telescopes; coordinators, and people in no team with telescopes, may look through any.
	const coordinator = Boolean(user?.roles.includes('coordinator'));
	const ownTelescopes = user ? telescopes.filter((t) => coordinator || user.teamIds.includes(t.teamId)) : [];
	const lookable = ownTelescopes.length && !coordinator ? ownTelescopes : telescopes;
	const kindOf = (id: string) => views.find((v) => v.id === id)?.kind;
	const chosen = lookable.find((t) => t.id === query.telescopeId) ?? lookable.find((t) => kindOf(t.id) === 'galaxies') ?? lookable[0] ?? null;
	const chosenView = chosen ? views.find((v) => v.id === chosen.id)! : null;
	const night = chosen ? tonightFor(chosen, now) : null;
	const sky = chosen ? skyNow(chosen, night, now) : null;
	const see = (target: { ra: number; dec: number }) => (chosen && night ? visibility(chosen, night, { raDeg: target.ra, decDeg: target.dec }, now) : null);
	/** Why the chosen telescope may not take a target (its own Sun-avoidance limit now), or null. */
	const sunBlock = (target: { ra: number; dec: number }, v: { sunDropped: string | null } | null) => {
		if (!chosen) return null;
		if (v) return v.sunDropped;
		const verdict = sunAvoidance({ raDeg: target.ra, decDeg: target.dec }, now, chosen.minSunSeparationDeg);
		return verdict.ok ? null : `dropped for Sun avoidance: ${verdict.reason}`;
	};

	const teams = [...new Map(telescopes.map((t) => [t.teamId, { id: t.teamId, name: t.teamName }])).values()].sort((a, b) => a.name.localeCompare(b.name));
	const team = teams.find((t) => t.id === query.teamId) ?? null;
	const filter: TargetFilter = {
		unclaimed: query.unclaimed,
		teamId: team?.id ?? null,
		sky: query.observableNow && sky ? (ra, dec) => observableNowMask(sky, ra, dec) : null
	};
	const active = query.observableNow || query.unclaimed || team !== null;

	// A page past the last (an edited link, or rows that a filter or a new ranking took away) shows the last one.
	const g = { ...query.galaxies };
	const galaxiesAt = (pageNo: number) => eventGalaxies(event.eventId, { sort: g.sort, dir: g.dir, offset: (pageNo - 1) * PAGE_SIZE, limit: PAGE_SIZE, filter });
	let galaxyPage = galaxiesAt(g.page);
	if (g.page > 1 && galaxyPage.galaxies.length === 0) {
		g.page = Math.max(1, Math.ceil(galaxyPage.total / PAGE_SIZE));
		galaxyPage = galaxiesAt(g.page);
	}
	const showGalaxyVisibility = chosenView?.kind === 'galaxies' || query.observableNow;
	const galaxyRows = galaxyPage.galaxies.map((r) => {
		const v = showGalaxyVisibility ? see(r) : null;
		return { ...r, visibility: v, sunBlocked: sunBlock(r, v) };
	});

	const fq = { ...query.fields };
	const fieldsAt = (pageNo: number) =>
		chosen && chosenView?.kind === 'fields' ? eventFieldsPage(event.eventId, chosen.id, { sort: fq.sort, dir: fq.dir, offset: (pageNo - 1) * PAGE_SIZE, limit: PAGE_SIZE, filter }) : null;
	let fieldPage = fieldsAt(fq.page);
	if (fieldPage && fq.page > 1 && fieldPage.rows.length === 0) {
		fq.page = Math.max(1, Math.ceil(fieldPage.total / PAGE_SIZE));
		fieldPage = fieldsAt(fq.page);
	}
	const fields = (fieldPage?.rows ?? []).map((f) => {
		const v = see(f);
		return { ...f, visibility: v, sunBlocked: sunBlock(f, v) };
	});
	const dropped = [
		...galaxyRows.filter((r) => r.sunBlocked).map((r) => ({ id: r.name, reason: r.sunBlocked! })),
		...fields.filter((f) => f.sunBlocked).map((f) => ({ id: f.fieldId, reason: f.sunBlocked! }))
	];

	// Claim state per target: only the open or finished claims matter to someone choosing what to observe.
	const claimRows = claims.listClaims(event.eventId).filter((c) => c.state !== 'released' && c.state !== 'lapsed');
	const claimOf = (kind: 'galaxy' | 'field', id: string) => {
		const c = claimRows.filter((r) => r.targetKind === kind && r.targetId === id).sort((a, b) => (a.state === 'done' ? 1 : 0) - (b.state === 'done' ? 1 : 0))[0];
		return c ? { id: c.id, state: c.state, teamId: c.teamId, teamName: c.teamName, telescopeId: c.telescopeId, telescopeName: c.telescopeName, filter: c.filter, epoch: c.epoch } : null;
	};
	const mayClaim = Boolean(user && can({ user, telescopeId: null }, 'claims.create'));
	const manages = Boolean(user && can({ user, telescopeId: null }, 'claims.manage'));
	// A claim from this page uses the telescope whose visibility is shown, when the looker's team owns it
	// (coordinators: any). The server still decides (claims.claim checks the team and the Sun again).
	const claimTelescopeId = mayClaim && chosen && ownTelescopes.some((t) => t.id === chosen.id) ? chosen.id : null;
	/** A Claim button only where the claim can succeed: open target, active event, the telescope may take it. */
	const canClaim = (claim: unknown, sunBlocked: string | null) => Boolean(claimTelescopeId && event.state === 'active' && !claim && !sunBlocked);

	return {
		claiming: {
			allowed: mayClaim,
			coordinator,
			teamIds: user?.teamIds ?? [],
			telescopes: mayClaim ? ownTelescopes.map((t) => ({ id: t.id, name: t.name, teamName: t.teamName })) : [],
			telescopeId: claimTelescopeId
		},
		/** Telescopes whose visibility this person may look at (links in the telescope table). */
		lookableIds: lookable.map((t) => t.id),
		lookingAsTeam: lookable !== telescopes,
		managing: manages
			? { lapseMinutes: claims.lapseMinutesFor(event.eventId), telescopes: telescopes.map((t) => ({ id: t.id, name: t.name, teamName: t.teamName })) }
			: null,
		event: { id: event.eventId, sourceEventId: event.sourceEventId, state: event.state, skymap: event.skymap },
		meta: meta && {
			skymapId: meta.skymapId,
			catalog: meta.catalog,
			mode: meta.mode,
			level: meta.level,
			regionAreaDeg2: meta.regionAreaDeg2,
			candidates: meta.candidates,
			galaxiesStored: meta.galaxiesStored,
			withoutDistance: meta.withoutDistance,
			completeness: meta.completeness,
			computedAt: meta.computedAt.toISOString(),
			computeMs: meta.computeMs
		},
		stale: Boolean(meta && event.skymap && meta.skymapId !== event.skymap.skymapId),
		telescopes: views,
		chosen: chosenView,
		filters: {
			observableNow: query.observableNow,
			unclaimed: query.unclaimed,
			teamId: team?.id ?? null,
			teamName: team?.name ?? null,
			active,
			teams,
			darkNow: sky?.dark ?? false
		},
		showGalaxyVisibility,
		galaxies: galaxyRows.map((r) => {
			const claim = claimOf('galaxy', String(r.galaxyId));
			return { ...r, claim, claimable: canClaim(claim, r.sunBlocked) };
		}),
		fields: fields.map((f) => {
			const claim = claimOf('field', f.fieldId);
			return { ...f, claim, claimable: canClaim(claim, f.sunBlocked) };
		}),
		distanceOutlierP: DISTANCE_OUTLIER_P,
		dropped,
		now: now.toISOString(),
		paging: { ...paging(g.page, galaxyPage.total, g.sort, g.dir), stored: galaxyPage.stored },
		fieldPaging: { ...paging(fq.page, fieldPage?.total ?? 0, fq.sort, fq.dir), stored: fieldPage?.stored ?? 0 }
	};
}

export type TargetsPageData = NonNullable<ReturnType<typeof targetsPageData>>;
