/**
 * The network plan: which telescope observes which ranked galaxy or sky field, and when, so that
 * the probability covered grows as fast as possible over the next hours.
 *
 * Pure: plain data in, plain data out; no clock, no I/O. Recompute it whenever the sky map,
 * the ranked targets or the live claims change — it is deterministic for the same input.
 *
 * Algorithm (a greedy list scheduler, see docs/plan.md):
 *  1. Every target expands to visits (one per requested filter/epoch; one visit by default).
 *     A visit is done at most once by the whole network.
 *  2. Each telescope has a free time, initially `start`. Repeatedly the telescope that is free
 *     earliest decides: its next exposure would start after the slew (`start = free + slew`) and
 *     last `exposureS`. Among the visits it may take, those observable at the exposure's start,
 *     middle and end (Sun ≤ the darkness limit at the site, geometric altitude ≥ minAltitudeDeg,
 *     airmass ≤ maxAirmass, solar elongation ≥ minSunSeparationDeg, Moon distance ≥
 *     minMoonSeparationDeg) compete; the most probable wins, except that a "last-chance"
 *     visit — observable now but no longer in the telescope's next slot — with at least
 *     `lastChanceRatio` of the winner's probability goes first when the winner will still be
 *     observable in the next slot (swapping the two then only delays the winner by one slot).
 *  3. When nothing is observable the telescope waits one `stepS`; outside darkness it jumps to
 *     the next darkness (found on the `stepS` grid and refined by bisection to 1 s).
 * Sampling three instants per exposure is exact for altitude and the Sun's altitude away from
 * culminations (both are monotonic between culminations), and near enough elsewhere for
 * exposures of minutes.
 *
 * Positions: identical in method to night.ts (`targetAltAz`, `sunPosition`, `moonSeparationDeg`,
 * `sunSeparationDeg`): annual aberration, IAU 2006 precession + truncated IAU 2000B nutation
 * and GAST from astronomy-engine, Kasten & Young (1989) airmass on the refracted altitude. For
 * speed the slowly varying parts (Earth's velocity, precession-nutation matrix, Sun and Moon
 * directions, GAST) are tabulated every 10 min and interpolated (linearly; the Moon's direction,
 * which curves faster, by three-point Lagrange); the Earth's rotation enters exactly through the
 * interpolated GAST. plan.spec.ts measures the agreement with night.ts (≤ 1e-6° for altitudes and
 * elongation, ≤ 1e-5° for the Moon) and every limit is applied with a 1e-4° margin on the safe side.
 */
import {
	BaryState,
	Body,
	Equator,
	GeoVector,
	MakeTime,
	Observer,
	Rotation_EQJ_EQD,
	SiderealTime
} from 'astronomy-engine';
import {
	airmassKastenYoung1989,
	ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG,
	NAUTICAL_TWILIGHT_ALTITUDE_DEG,
	standardRefractionDeg,
	validateSite,
	validateTarget
} from './night.ts';

// ---------------------------------------------------------------------------------------------
// Input and output types

export type PlanTargetKind = 'galaxy' | 'field';

/** One requested observation of a target. Omitted filter: the telescope's default filter. */
export interface PlanVisit {
	filter?: string;
	/** Epochs are ordered: epoch n waits until every lower epoch of the target has ended ≥ minEpochGapS earlier. */
	epoch?: number;
}

export interface PlanTarget {
	id: string;
	kind: PlanTargetKind;
	raDeg: number;
	decDeg: number;
	/** Probability the target holds (galaxy: its share of the ranked candidates; field: enclosed probability). */
	probability: number;
	/** Field targets: the telescope id(s) whose field of view made the tiling. Absent: any telescope. */
	fieldFor?: string | readonly string[];
	name?: string;
	/** Absent: one visit in the telescope's default filter. */
	visits?: readonly PlanVisit[];
}

/** A telescope as stored in the `telescope` table (same field names). */
export interface PlanTelescope {
	id: string;
	name: string;
	latitudeDeg: number;
	longitudeDeg: number;
	elevationM: number;
	fovShape: 'circle' | 'rectangle';
	fovWidthDeg: number;
	fovHeightDeg: number;
	filters: readonly string[];
	limitingMag: number;
	limitingMagExposureS: number;
	minAltitudeDeg: number;
	maxAirmass: number;
	minSunSeparationDeg: number;
	minMoonSeparationDeg: number;
	slewOverheadS: number;
}

/**
 * A live claim: telescope `telescopeId` has taken this target (in this filter / epoch; absent =
 * any). A claimed visit is never planned for another telescope; it stays in the claimant's
 * plan, scheduled like any other visit (and the kind/field-of-view rule is waived for it).
 */
export interface PlanClaim {
	targetId: string;
	filter?: string | null;
	epoch?: number | null;
	telescopeId: string;
}

export interface PlanInput {
	targets: readonly PlanTarget[];
	telescopes: readonly PlanTelescope[];
	claims?: readonly PlanClaim[];
	start: Date;
	/** Length of the plan, hours (default 24). */
	horizonH?: number;
	/** Waiting step when nothing is observable, and the grid for darkness and drop reasons, s (default 300). */
	stepS?: number;
	/** Exposure per telescope (number: all telescopes), s. Default: the telescope's limitingMagExposureS. */
	exposureS?: number | Readonly<Record<string, number>>;
	/** Filter for visits that name none, per telescope id. Default: the telescope's first filter. */
	defaultFilter?: Readonly<Record<string, string>>;
	/** 'astronomical' (Sun ≤ −18°, default) or 'nautical' (Sun ≤ −12°). */
	darkness?: 'astronomical' | 'nautical';
	/** Let wide-field telescopes take galaxies too (default false). */
	galaxiesOnWideField?: boolean;
	/** A telescope with a field of view at least this large is wide-field (default 1 deg²). */
	wideFieldMinAreaDeg2?: number;
	/** 'last-chance' (default) or 'none' (pure highest-probability-first). */
	urgency?: 'last-chance' | 'none';
	/** A last-chance visit needs at least this fraction of the best visit's probability (default 0.5). */
	lastChanceRatio?: number;
	/** Priority multiplier for visits of a target that is already covered (default 1: same priority). */
	repeatPriority?: number;
	/** Minimum time from the end of one epoch of a target to the start of the next, s (default 3600). */
	minEpochGapS?: number;
}

export interface PlanAssignment {
	/** 1-based position in the telescope's list. */
	order: number;
	telescopeId: string;
	targetId: string;
	kind: PlanTargetKind;
	name: string | null;
	raDeg: number;
	decDeg: number;
	/** Exposure start and end, ISO-8601 UTC. The slew takes the slewOverheadS before `start`. */
	start: string;
	end: string;
	exposureS: number;
	filter: string | null;
	epoch: number | null;
	/** Geometric altitude at the exposure's start and end. */
	altitudeDeg: number;
	altitudeEndDeg: number;
	/** Airmass at the exposure's start (Kasten & Young 1989) and the worst of start/middle/end. */
	airmass: number;
	maxAirmass: number;
	/** Smallest Moon distance over start/middle/end (topocentric). */
	moonSepDeg: number;
	/** Solar elongation at the start (geocentric). */
	sunSepDeg: number;
	sunAltitudeDeg: number;
	probability: number;
	/** Probability this exposure adds to the network's coverage (0 for a repeat visit). */
	newProbability: number;
	/** Running sum of newProbability over this telescope's list. */
	cumulativeProbability: number;
	/** Chosen ahead of a more probable visit because it would be gone in the next slot. */
	lastChance: boolean;
}

export interface CoveragePoint {
	/** Hours since the plan's start. */
	timeH: number;
	time: string;
	probability: number;
}

export interface DarkInterval {
	start: string;
	end: string;
}

export interface TelescopePlan {
	telescopeId: string;
	name: string;
	exposureS: number;
	slewOverheadS: number;
	defaultFilter: string | null;
	darkness: DarkInterval[];
	assignments: PlanAssignment[];
	/** Step curve of the probability this telescope added first (network-wide first coverage). */
	coverage: CoveragePoint[];
}

export type DropReason =
	| 'claimed'
	| 'no-telescope'
	| 'sun'
	| 'no-darkness'
	| 'below-altitude'
	| 'airmass'
	| 'moon'
	| 'epoch-order'
	| 'no-time';

export interface DroppedVisit {
	targetId: string;
	filter: string | null;
	epoch: number | null;
	probability: number;
	reason: DropReason;
	detail: string;
}

export interface NetworkPlan {
	start: string;
	end: string;
	horizonH: number;
	stepS: number;
	sunAltitudeLimitDeg: number;
	telescopes: TelescopePlan[];
	dropped: DroppedVisit[];
	/** Step curve: probability of the distinct targets whose first exposure has ended, vs time. */
	coverage: CoveragePoint[];
	/** Sum of the probabilities of the distinct targets planned. */
	coveredProbability: number;
	/** Sum of the probabilities of all distinct targets given. */
	offeredProbability: number;
}

// ---------------------------------------------------------------------------------------------
// Ephemeris tables (per plan) and instants

const DEG = Math.PI / 180;
/** Speed of light in AU per day (IAU 2012 au), as in night.ts. */
const C_AU_PER_DAY = 173.144632674;
/** Spacing of the tabulated slowly varying quantities. */
const TABLE_STEP_MS = 600_000;
/**
 * Every limit is applied this much on the safe side, so that the tabulated positions (measured in
 * plan.spec.ts to agree with night.ts within 1e-6° for altitudes and 1e-5° for the Moon) never let
 * an exposure through that night.ts itself would refuse.
 */
const MARGIN_DEG = 1e-4;
const AIRMASS_MARGIN = 1e-5;
/** Darkness edges are refined to this. */
const EDGE_PRECISION_MS = 1000;

type Vec3 = [number, number, number];

interface SiteTables {
	sinLat: number;
	cosLat: number;
	longitudeDeg: number;
	sunTopo: Float64Array;
	moonTopo: Float64Array;
}

interface GlobalTables {
	t0: number;
	count: number;
	gastDeg: Float64Array; // unwrapped
	beta: Float64Array; // v/c, J2000 axes
	sunGeo: Float64Array;
	/** Rotation_EQJ_EQD matrices, 9 per node, astronomy-engine's rot[i][j] order. */
	precNut: Float64Array;
}

/** What a target needs to know about one instant at one site. */
interface Instant {
	ms: number;
	/** Zenith direction on J2000 axes (of-date zenith rotated back through precession-nutation). */
	zenith: Vec3;
	beta: Vec3;
	sunGeo: Vec3;
	moonTopo: Vec3;
	sunAltitudeDeg: number;
}

function unit(x: number, y: number, z: number): Vec3 {
	const r = Math.hypot(x, y, z);
	return [x / r, y / r, z / r];
}

function radecVector(raDeg: number, decDeg: number): Vec3 {
	const ra = raDeg * DEG;
	const dec = decDeg * DEG;
	return [Math.cos(dec) * Math.cos(ra), Math.cos(dec) * Math.sin(ra), Math.sin(dec)];
}

function observerOf(site: { latitudeDeg: number; longitudeDeg: number; elevationM: number }): Observer {
	const lon = site.longitudeDeg > 180 ? site.longitudeDeg - 360 : site.longitudeDeg;
	return new Observer(site.latitudeDeg, lon, site.elevationM);
}

function buildGlobalTables(t0: number, t1: number): GlobalTables {
	const count = Math.ceil((t1 - t0) / TABLE_STEP_MS) + 3;
	const gastDeg = new Float64Array(count);
	const beta = new Float64Array(count * 3);
	const sunGeo = new Float64Array(count * 3);
	const precNut = new Float64Array(count * 9);
	let previous = 0;
	for (let k = 0; k < count; k++) {
		const time = MakeTime(new Date(t0 + k * TABLE_STEP_MS));
		let g = SiderealTime(time) * 15;
		if (k > 0) while (g < previous) g += 360;
		gastDeg[k] = previous = g;
		const earth = BaryState(Body.Earth, time);
		beta.set([earth.vx / C_AU_PER_DAY, earth.vy / C_AU_PER_DAY, earth.vz / C_AU_PER_DAY], k * 3);
		const s = GeoVector(Body.Sun, time, true);
		sunGeo.set(unit(s.x, s.y, s.z), k * 3);
		const rot = Rotation_EQJ_EQD(time).rot;
		for (let i = 0; i < 3; i++) for (let j = 0; j < 3; j++) precNut[k * 9 + i * 3 + j] = rot[i][j];
	}
	return { t0, count, gastDeg, beta, sunGeo, precNut };
}

function buildSiteTables(g: GlobalTables, site: { latitudeDeg: number; longitudeDeg: number; elevationM: number }): SiteTables {
	const observer = observerOf(site);
	const sunTopo = new Float64Array(g.count * 3);
	const moonTopo = new Float64Array(g.count * 3);
	for (let k = 0; k < g.count; k++) {
		const time = MakeTime(new Date(g.t0 + k * TABLE_STEP_MS));
		const s = Equator(Body.Sun, time, observer, false, true).vec;
		sunTopo.set(unit(s.x, s.y, s.z), k * 3);
		const m = Equator(Body.Moon, time, observer, false, true).vec;
		moonTopo.set(unit(m.x, m.y, m.z), k * 3);
	}
	return {
		sinLat: Math.sin(observer.latitude * DEG),
		cosLat: Math.cos(observer.latitude * DEG),
		longitudeDeg: observer.longitude,
		sunTopo,
		moonTopo
	};
}

function lerpVec(table: Float64Array, k: number, f: number): Vec3 {
	const a = k * 3;
	const b = a + 3;
	return unit(
		table[a] + (table[b] - table[a]) * f,
		table[a + 1] + (table[b + 1] - table[a + 1]) * f,
		table[a + 2] + (table[b + 2] - table[a + 2]) * f
	);
}

/** Three-point Lagrange interpolation about the nearest node: the Moon's topocentric direction curves too much for a chord. */
function quadVec(table: Float64Array, count: number, x: number): Vec3 {
	const c = Math.min(Math.max(Math.round(x), 1), count - 2);
	const t = x - c;
	const [wm, w0, wp] = [(t * (t - 1)) / 2, 1 - t * t, (t * (t + 1)) / 2];
	const [a, b, d] = [(c - 1) * 3, c * 3, (c + 1) * 3];
	return unit(
		wm * table[a] + w0 * table[b] + wp * table[d],
		wm * table[a + 1] + w0 * table[b + 1] + wp * table[d + 1],
		wm * table[a + 2] + w0 * table[b + 2] + wp * table[d + 2]
	);
}

function instantAt(g: GlobalTables, s: SiteTables, ms: number): Instant {
	const x = (ms - g.t0) / TABLE_STEP_MS;
	const k = Math.min(Math.max(Math.floor(x), 0), g.count - 2);
	const f = x - k;
	const lstRad = (g.gastDeg[k] + (g.gastDeg[k + 1] - g.gastDeg[k]) * f + s.longitudeDeg) * DEG;
	// Zenith of date (astronomy-engine's Rotation_EQD_HOR z axis), then back to J2000 axes by the
	// transpose of the nearest precession-nutation matrix (it changes by < 0.01″ in 10 min).
	const zd: Vec3 = [s.cosLat * Math.cos(lstRad), s.cosLat * Math.sin(lstRad), s.sinLat];
	const p = (f < 0.5 ? k : k + 1) * 9;
	const pn = g.precNut;
	const zenith: Vec3 = [
		pn[p] * zd[0] + pn[p + 1] * zd[1] + pn[p + 2] * zd[2],
		pn[p + 3] * zd[0] + pn[p + 4] * zd[1] + pn[p + 5] * zd[2],
		pn[p + 6] * zd[0] + pn[p + 7] * zd[1] + pn[p + 8] * zd[2]
	];
	const beta: Vec3 = [
		g.beta[k * 3] + (g.beta[k * 3 + 3] - g.beta[k * 3]) * f,
		g.beta[k * 3 + 1] + (g.beta[k * 3 + 4] - g.beta[k * 3 + 1]) * f,
		g.beta[k * 3 + 2] + (g.beta[k * 3 + 5] - g.beta[k * 3 + 2]) * f
	];
	const sunTopo = lerpVec(s.sunTopo, k, f);
	const sunAltitudeDeg = Math.asin(clampUnit(dot(sunTopo, zenith))) / DEG;
	return { ms, zenith, beta, sunGeo: lerpVec(g.sunGeo, k, f), moonTopo: quadVec(s.moonTopo, g.count, x), sunAltitudeDeg };
}

function dot(a: Vec3, b: Vec3): number {
	return a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
}

function clampUnit(x: number): number {
	return x > 1 ? 1 : x < -1 ? -1 : x;
}

function angleDeg(a: Vec3, b: Vec3): number {
	const cx = a[1] * b[2] - a[2] * b[1];
	const cy = a[2] * b[0] - a[0] * b[2];
	const cz = a[0] * b[1] - a[1] * b[0];
	return Math.atan2(Math.hypot(cx, cy, cz), dot(a, b)) / DEG;
}

/** Apparent direction: u' = u + β − (u·β) u, renormalized (first-order annual aberration, as night.ts). */
function apparent(u: Vec3, beta: Vec3): Vec3 {
	const d = dot(u, beta);
	return unit(u[0] + beta[0] - d * u[0], u[1] + beta[1] - d * u[1], u[2] + beta[2] - d * u[2]);
}

/** How far a target gets through the constraints at an instant (for drop reasons). */
const Stage = { Daylight: 0, Dark: 1, AboveAltitude: 2, WithinAirmass: 3, ClearOfSun: 4, Observable: 5 } as const;
type Stage = (typeof Stage)[keyof typeof Stage];

interface Sample {
	stage: Stage;
	altitudeDeg: number;
	airmass: number;
	sunSepDeg: number;
	moonSepDeg: number;
}

interface Limits {
	sunAltitudeLimitDeg: number;
	minAltitudeDeg: number;
	maxAirmass: number;
	minSunSeparationDeg: number;
	minMoonSeparationDeg: number;
}

function sampleAt(u: Vec3, at: Instant, limits: Limits): Sample {
	const out: Sample = { stage: Stage.Daylight, altitudeDeg: NaN, airmass: NaN, sunSepDeg: NaN, moonSepDeg: NaN };
	const a = apparent(u, at.beta);
	out.altitudeDeg = Math.asin(clampUnit(dot(a, at.zenith))) / DEG;
	if (at.sunAltitudeDeg > limits.sunAltitudeLimitDeg) return out;
	out.stage = Stage.Dark;
	if (out.altitudeDeg < limits.minAltitudeDeg) return out;
	out.stage = Stage.AboveAltitude;
	const x = airmassKastenYoung1989(out.altitudeDeg + standardRefractionDeg(out.altitudeDeg));
	out.airmass = x ?? Infinity;
	if (x === null || x > limits.maxAirmass) return out;
	out.stage = Stage.WithinAirmass;
	out.sunSepDeg = angleDeg(a, at.sunGeo);
	if (out.sunSepDeg < limits.minSunSeparationDeg) return out;
	out.stage = Stage.ClearOfSun;
	out.moonSepDeg = angleDeg(a, at.moonTopo);
	if (out.moonSepDeg < limits.minMoonSeparationDeg) return out;
	out.stage = Stage.Observable;
	return out;
}

// ---------------------------------------------------------------------------------------------
// Planning

interface VisitState {
	index: number;
	target: PlanTarget;
	targetIndex: number;
	filter: string | null;
	epoch: number | null;
	/** Telescope indices allowed by live claims; null when unclaimed. */
	reservedFor: Set<number> | null;
	claimedBy: string[];
	/** Per telescope: the filter it would use, or null when it may not take the visit. */
	filterFor: (string | null)[];
	ineligibleWhy: string[];
	assigned: PlanAssignment | null;
}

interface TelescopeState {
	index: number;
	telescope: PlanTelescope;
	site: SiteTables;
	exposureMs: number;
	slewMs: number;
	defaultFilter: string | null;
	limits: Limits;
	darkness: [number, number][];
	candidates: VisitState[];
	free: number;
	assignments: PlanAssignment[];
	cumulative: number;
	instants: Map<number, Instant>;
}

function fovAreaDeg2(t: PlanTelescope): number {
	return t.fovShape === 'circle' ? (Math.PI / 4) * t.fovWidthDeg * t.fovWidthDeg : t.fovWidthDeg * t.fovHeightDeg;
}

function positive(name: string, value: number): void {
	if (!Number.isFinite(value) || value <= 0) throw new Error(`${name} must be a positive number, got ${String(value)}`);
}

function nonNegative(name: string, value: number): void {
	if (!Number.isFinite(value) || value < 0) throw new Error(`${name} must be zero or more, got ${String(value)}`);
}

function claimMatches(c: PlanClaim, targetId: string, filter: string | null, epoch: number | null): boolean {
	if (c.targetId !== targetId) return false;
	if (c.filter != null && filter !== null && c.filter !== filter) return false;
	if (c.epoch != null && epoch !== null && c.epoch !== epoch) return false;
	return true;
}

/**
 * Plans the network's next `horizonH` hours: per telescope an ordered observing list, the visits
 * left out with a reason, and the expected covered probability over time. See the module comment
 * and docs/plan.md for the rules; constraints follow the telescope row (geometric altitude, Kasten
 * & Young 1989 airmass, geocentric solar elongation, topocentric Moon distance, as in night.ts).
 */
export function planNetwork(input: PlanInput): NetworkPlan {
	const startMs = input.start instanceof Date ? input.start.getTime() : NaN;
	if (!Number.isFinite(startMs)) throw new Error('start must be a valid Date');
	const horizonH = input.horizonH ?? 24;
	positive('horizonH', horizonH);
	if (horizonH > 96) throw new Error(`horizonH ${horizonH} is over the 96 h this planner is meant for`);
	const stepS = input.stepS ?? 300;
	positive('stepS', stepS);
	const stepMs = stepS * 1000;
	const endMs = startMs + horizonH * 3_600_000;
	const sunAltitudeLimitDeg = input.darkness === 'nautical' ? NAUTICAL_TWILIGHT_ALTITUDE_DEG : ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG;
	const wideFieldMinAreaDeg2 = input.wideFieldMinAreaDeg2 ?? 1;
	const lastChanceRatio = input.lastChanceRatio ?? 0.5;
	const repeatPriority = input.repeatPriority ?? 1;
	const minEpochGapMs = (input.minEpochGapS ?? 3600) * 1000;
	const urgency = input.urgency ?? 'last-chance';
	nonNegative('lastChanceRatio', lastChanceRatio);
	nonNegative('repeatPriority', repeatPriority);
	nonNegative('minEpochGapS', minEpochGapMs);

	const telescopeIds = new Map<string, number>();
	input.telescopes.forEach((t, i) => {
		if (telescopeIds.has(t.id)) throw new Error(`telescope id ${t.id} appears twice`);
		telescopeIds.set(t.id, i);
		validateSite(t);
		nonNegative(`${t.id}: slewOverheadS`, t.slewOverheadS);
		positive(`${t.id}: maxAirmass`, t.maxAirmass);
	});
	const targetIds = new Set<string>();
	for (const t of input.targets) {
		if (targetIds.has(t.id)) throw new Error(`target id ${t.id} appears twice`);
		targetIds.add(t.id);
		validateTarget(t);
		nonNegative(`${t.id}: probability`, t.probability);
	}

	let maxSlotMs = 0;
	const exposureOf = (t: PlanTelescope): number => {
		const e = typeof input.exposureS === 'number' ? input.exposureS : (input.exposureS?.[t.id] ?? t.limitingMagExposureS);
		positive(`${t.id}: exposureS`, e);
		return e;
	};
	for (const t of input.telescopes) maxSlotMs = Math.max(maxSlotMs, (exposureOf(t) + t.slewOverheadS) * 1000);

	// Tables reach one slot past the end: the last-chance test looks one slot ahead.
	const global = buildGlobalTables(startMs, endMs + 2 * maxSlotMs + stepMs);
	const sites = new Map<string, SiteTables>();

	const telescopes: TelescopeState[] = input.telescopes.map((t, index) => {
		const key = `${t.latitudeDeg}|${t.longitudeDeg}|${t.elevationM}`;
		let site = sites.get(key);
		if (!site) sites.set(key, (site = buildSiteTables(global, t)));
		const defaultFilter = input.defaultFilter?.[t.id] ?? t.filters[0] ?? null;
		return {
			index,
			telescope: t,
			site,
			exposureMs: exposureOf(t) * 1000,
			slewMs: t.slewOverheadS * 1000,
			defaultFilter,
			limits: {
				sunAltitudeLimitDeg: sunAltitudeLimitDeg - MARGIN_DEG,
				minAltitudeDeg: t.minAltitudeDeg + MARGIN_DEG,
				maxAirmass: t.maxAirmass - AIRMASS_MARGIN,
				minSunSeparationDeg: t.minSunSeparationDeg + MARGIN_DEG,
				minMoonSeparationDeg: t.minMoonSeparationDeg + MARGIN_DEG
			},
			darkness: [],
			candidates: [],
			free: startMs,
			assignments: [],
			cumulative: 0,
			instants: new Map()
		};
	});

	const at = (ts: TelescopeState, ms: number): Instant => {
		let i = ts.instants.get(ms);
		if (!i) ts.instants.set(ms, (i = instantAt(global, ts.site, ms)));
		return i;
	};

	for (const ts of telescopes) ts.darkness = darkIntervals(startMs, endMs, stepMs, ts.limits.sunAltitudeLimitDeg, (ms) => at(ts, ms).sunAltitudeDeg);

	// Visits, eligibility and claims.
	const claims = input.claims ?? [];
	const visits: VisitState[] = [];
	const unitVectors: Vec3[] = input.targets.map((t) => radecVector(t.raDeg, t.decDeg));
	input.targets.forEach((target, targetIndex) => {
		const requested = target.visits && target.visits.length > 0 ? target.visits : [{}];
		const seen = new Set<string>();
		for (const v of requested) {
			const filter = v.filter ?? null;
			const epoch = v.epoch ?? null;
			if (epoch !== null && (!Number.isInteger(epoch) || epoch < 0)) throw new Error(`${target.id}: epoch must be a whole number ≥ 0`);
			const key = `${filter ?? ''}|${epoch ?? ''}`;
			if (seen.has(key)) continue;
			seen.add(key);
			const matching = claims.filter((c) => claimMatches(c, target.id, filter, epoch));
			const claimedBy = [...new Set(matching.map((c) => c.telescopeId))];
			const reservedFor = matching.length
				? new Set(claimedBy.map((id) => telescopeIds.get(id)).filter((i): i is number => i !== undefined))
				: null;
			const visit: VisitState = {
				index: visits.length,
				target,
				targetIndex,
				filter,
				epoch,
				reservedFor,
				claimedBy,
				filterFor: [],
				ineligibleWhy: [],
				assigned: null
			};
			for (const ts of telescopes) {
				const why = ineligibility(visit, ts, input.galaxiesOnWideField === true, wideFieldMinAreaDeg2);
				visit.filterFor.push(why === null ? (filter ?? ts.defaultFilter) : null);
				if (why === null) ts.candidates.push(visit);
				else visit.ineligibleWhy.push(why);
			}
			visits.push(visit);
		}
	});
	const visitsByTarget = new Map<number, VisitState[]>();
	for (const v of visits) {
		const list = visitsByTarget.get(v.targetIndex) ?? [];
		list.push(v);
		visitsByTarget.set(v.targetIndex, list);
	}
	const covered = new Uint8Array(input.targets.length);

	const epochReady = (v: VisitState, startAt: number): boolean => {
		if (v.epoch === null) return true;
		for (const other of visitsByTarget.get(v.targetIndex) ?? []) {
			if (other.epoch === null || other.epoch >= v.epoch) continue;
			if (!other.assigned || Date.parse(other.assigned.end) + minEpochGapMs > startAt) return false;
		}
		return true;
	};

	const observe = (ts: TelescopeState, v: VisitState, s: number, e: number): Sample[] | null => {
		const u = unitVectors[v.targetIndex];
		const out: Sample[] = [];
		for (const ms of [s, (s + e) / 2, e]) {
			const sample = sampleAt(u, at(ts, ms), ts.limits);
			if (sample.stage !== Stage.Observable) return null;
			out.push(sample);
		}
		return out;
	};

	// Earliest-free telescope decides; decision times never go back, so every assignment that
	// ends before a decision is already known when the epoch order is checked.
	const active = new Set(telescopes);
	while (active.size > 0) {
		let ts: TelescopeState | null = null;
		for (const c of active) if (!ts || c.free < ts.free) ts = c;
		if (!ts) break;
		const s = ts.free + ts.slewMs;
		const e = s + ts.exposureMs;
		if (e > endMs) {
			active.delete(ts);
			continue;
		}
		const exposureMs = ts.exposureMs;
		const dark = ts.darkness.find(([a, b]) => Math.max(a, s) + exposureMs <= b);
		if (!dark) {
			active.delete(ts);
			continue;
		}
		if (s < dark[0]) {
			// The slew may run in twilight; the exposure starts when darkness does.
			ts.free = dark[0] - ts.slewMs;
			continue;
		}

		let best: { v: VisitState; samples: Sample[]; priority: number } | null = null;
		const observable: { v: VisitState; samples: Sample[]; priority: number }[] = [];
		for (const v of ts.candidates) {
			if (v.assigned || !epochReady(v, s)) continue;
			const samples = observe(ts, v, s, e);
			if (!samples) continue;
			const priority = v.target.probability * (covered[v.targetIndex] ? repeatPriority : 1);
			const entry = { v, samples, priority };
			observable.push(entry);
			if (!best || priority > best.priority) best = entry;
		}
		if (!best) {
			ts.free += stepMs;
			continue;
		}
		let chosen = best;
		let lastChance = false;
		if (urgency === 'last-chance' && observable.length > 1) {
			const s2 = e + ts.slewMs;
			const e2 = s2 + ts.exposureMs;
			if (observe(ts, best.v, s2, e2)) {
				let rescue: typeof best | null = null;
				for (const entry of observable) {
					if (entry === best || entry.priority < lastChanceRatio * best.priority) continue;
					if (rescue && entry.priority <= rescue.priority) continue;
					if (!observe(ts, entry.v, s2, e2)) rescue = entry;
				}
				if (rescue) {
					chosen = rescue;
					lastChance = true;
				}
			}
		}

		const v = chosen.v;
		const [first, mid, last] = chosen.samples;
		const newProbability = covered[v.targetIndex] ? 0 : v.target.probability;
		covered[v.targetIndex] = 1;
		ts.cumulative += newProbability;
		const assignment: PlanAssignment = {
			order: ts.assignments.length + 1,
			telescopeId: ts.telescope.id,
			targetId: v.target.id,
			kind: v.target.kind,
			name: v.target.name ?? null,
			raDeg: v.target.raDeg,
			decDeg: v.target.decDeg,
			start: new Date(s).toISOString(),
			end: new Date(e).toISOString(),
			exposureS: ts.exposureMs / 1000,
			filter: v.filterFor[ts.index],
			epoch: v.epoch,
			altitudeDeg: first.altitudeDeg,
			altitudeEndDeg: last.altitudeDeg,
			airmass: first.airmass,
			maxAirmass: Math.max(first.airmass, mid.airmass, last.airmass),
			moonSepDeg: Math.min(first.moonSepDeg, mid.moonSepDeg, last.moonSepDeg),
			sunSepDeg: first.sunSepDeg,
			sunAltitudeDeg: at(ts, s).sunAltitudeDeg,
			probability: v.target.probability,
			newProbability,
			cumulativeProbability: ts.cumulative,
			lastChance
		};
		v.assigned = assignment;
		ts.assignments.push(assignment);
		ts.free = e;
	}

	// Why the rest was left out.
	const dropped: DroppedVisit[] = [];
	for (const v of visits) {
		if (v.assigned) continue;
		dropped.push({ targetId: v.target.id, filter: v.filter, epoch: v.epoch, probability: v.target.probability, ...dropReason(v) });
	}

	function dropReason(v: VisitState): { reason: DropReason; detail: string } {
		if (v.reservedFor && v.reservedFor.size === 0) {
			return { reason: 'claimed', detail: `claimed by ${v.claimedBy.join(', ')}, not a telescope of this plan` };
		}
		const eligible = telescopes.filter((ts) => v.filterFor[ts.index] !== null);
		if (eligible.length === 0) {
			return { reason: 'no-telescope', detail: [...new Set(v.ineligibleWhy)].join('; ') };
		}
		const u = unitVectors[v.targetIndex];
		// Solar elongation first: a target near the Sun is up only in daylight, and saying so is
		// more useful than "never above the horizon in the dark".
		let maxElongation = -Infinity;
		let sunAlwaysClose = true;
		for (const ts of eligible) {
			for (let ms = startMs; ms <= endMs; ms += stepMs) {
				const i = at(ts, ms);
				const el = angleDeg(apparent(u, i.beta), i.sunGeo);
				maxElongation = Math.max(maxElongation, el);
				if (el >= ts.limits.minSunSeparationDeg) sunAlwaysClose = false;
			}
		}
		if (sunAlwaysClose) {
			const limit = Math.min(...eligible.map((ts) => ts.telescope.minSunSeparationDeg));
			return {
				reason: 'sun',
				detail: `solar elongation at most ${maxElongation.toFixed(1)}°, inside the ${limit}° Sun-avoidance limit: up only near the Sun`
			};
		}
		let stage: Stage = Stage.Daylight;
		let highestDarkDeg = -Infinity;
		for (const ts of eligible) {
			for (let ms = startMs; ms <= endMs; ms += stepMs) {
				const sample = sampleAt(u, at(ts, ms), ts.limits);
				if (sample.stage >= Stage.Dark) highestDarkDeg = Math.max(highestDarkDeg, sample.altitudeDeg);
				if (sample.stage > stage) stage = sample.stage;
			}
		}
		const where = eligible.map((ts) => ts.telescope.name).join(', ');
		switch (stage) {
			case Stage.Daylight:
				return { reason: 'no-darkness', detail: `no darkness (Sun below ${sunAltitudeLimitDeg}°) at ${where} within the plan` };
			case Stage.Dark:
				return {
					reason: 'below-altitude',
					detail: `never above the altitude limit during darkness at ${where} (highest ${highestDarkDeg.toFixed(1)}°)`
				};
			case Stage.AboveAltitude:
				return { reason: 'airmass', detail: `airmass above the limit whenever it is dark and high enough at ${where}` };
			case Stage.WithinAirmass:
				return { reason: 'sun', detail: `inside the Sun-avoidance limit whenever it is dark and high enough at ${where}` };
			case Stage.ClearOfSun:
				return { reason: 'moon', detail: `too close to the Moon whenever it is otherwise observable at ${where}` };
			default: {
				const waiting = (visitsByTarget.get(v.targetIndex) ?? []).some((o) => o.epoch !== null && v.epoch !== null && o.epoch < v.epoch && !o.assigned);
				if (waiting) return { reason: 'epoch-order', detail: `an earlier epoch of this target was not planned` };
				return { reason: 'no-time', detail: `observable at ${where}, but the time went to more probable targets` };
			}
		}
	}

	// Coverage curves: each target counts once, when its first exposure ends.
	const all = telescopes.flatMap((ts) => ts.assignments).filter((a) => a.newProbability > 0);
	all.sort((a, b) => Date.parse(a.end) - Date.parse(b.end));
	const point = (ms: number, probability: number): CoveragePoint => ({
		timeH: (ms - startMs) / 3_600_000,
		time: new Date(ms).toISOString(),
		probability
	});
	const curve = (list: PlanAssignment[]): CoveragePoint[] => {
		const points = [point(startMs, 0)];
		let sum = 0;
		for (const a of list) {
			sum += a.newProbability;
			points.push(point(Date.parse(a.end), sum));
		}
		points.push(point(endMs, sum));
		return points;
	};
	const coverage = curve(all);

	return {
		start: new Date(startMs).toISOString(),
		end: new Date(endMs).toISOString(),
		horizonH,
		stepS,
		sunAltitudeLimitDeg,
		telescopes: telescopes.map((ts) => ({
			telescopeId: ts.telescope.id,
			name: ts.telescope.name,
			exposureS: ts.exposureMs / 1000,
			slewOverheadS: ts.telescope.slewOverheadS,
			defaultFilter: ts.defaultFilter,
			darkness: ts.darkness.map(([a, b]) => ({ start: new Date(a).toISOString(), end: new Date(b).toISOString() })),
			assignments: ts.assignments,
			coverage: curve(all.filter((a) => a.telescopeId === ts.telescope.id))
		})),
		dropped,
		coverage,
		coveredProbability: coverage[coverage.length - 1].probability,
		offeredProbability: input.targets.reduce((s, t) => s + t.probability, 0)
	};
}

function ineligibility(v: VisitState, ts: TelescopeState, galaxiesOnWideField: boolean, wideFieldMinAreaDeg2: number): string | null {
	const t = ts.telescope;
	if (v.reservedFor) {
		if (!v.reservedFor.has(ts.index)) return `claimed by ${v.claimedBy.join(', ')}`;
	} else if (v.target.kind === 'field') {
		const owners = v.target.fieldFor === undefined ? null : typeof v.target.fieldFor === 'string' ? [v.target.fieldFor] : v.target.fieldFor;
		if (owners && !owners.includes(t.id)) return `field tiled for ${owners.join(', ')}`;
	} else if (!galaxiesOnWideField && fovAreaDeg2(t) >= wideFieldMinAreaDeg2) {
		return `galaxies go to narrow-field telescopes (field of view under ${wideFieldMinAreaDeg2} deg²)`;
	}
	if (v.filter !== null && !t.filters.includes(v.filter)) return `filter ${v.filter} not on ${t.name}`;
	if (v.filter === null && ts.defaultFilter === null) return `${t.name} lists no filter`;
	return null;
}

/**
 * Intervals inside [t0, t1] with the Sun at or below the limit: the `stepMs` grid, each
 * crossing refined by bisection to 1 s, both ends on the dark side. An interval shorter than
 * one step between two light samples can be missed.
 */
function darkIntervals(
	t0: number,
	t1: number,
	stepMs: number,
	limitDeg: number,
	sunAltitudeDeg: (ms: number) => number
): [number, number][] {
	const isDark = (ms: number) => sunAltitudeDeg(ms) <= limitDeg;
	const edge = (lo: number, hi: number): [number, number] => {
		const darkAtLo = isDark(lo);
		while (hi - lo > EDGE_PRECISION_MS) {
			const m = Math.round((lo + hi) / 2);
			if (isDark(m) === darkAtLo) lo = m;
			else hi = m;
		}
		return [lo, hi];
	};
	const out: [number, number][] = [];
	let openAt: number | null = isDark(t0) ? t0 : null;
	let previous = t0;
	for (let ms = Math.min(t0 + stepMs, t1); ; ms = Math.min(ms + stepMs, t1)) {
		const dark = isDark(ms);
		if (dark && openAt === null) openAt = edge(previous, ms)[1];
		else if (!dark && openAt !== null) {
			out.push([openAt, edge(previous, ms)[0]]);
			openAt = null;
		}
		previous = ms;
		if (ms >= t1) break;
	}
	if (openAt !== null) out.push([openAt, t1]);
	return out;
}
