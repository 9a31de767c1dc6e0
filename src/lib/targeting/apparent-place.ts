/**
 * Where a fixed ICRS (J2000) direction appears from a site at an instant: apparent place
 * (annual aberration), precession–nutation to the equator of date, sidereal time, altitude and
 * azimuth, refraction and airmass. The one home of these formulas, in three forms that give the
 * same numbers (apparent-place.spec.ts compares them with each other and with astropy):
 *
 *  - scalar (`targetAltAz`): one target at one instant, through astronomy-engine's rotation
 *    matrices J2000 → horizon; used by night windows, the CLI and the visibility of a page row;
 *  - vectorised (`apparentSkyAt` + `altitudesNow`): many targets at one instant — everything that
 *    does not depend on the target is computed once, then per target the hour-angle formula
 *      sin h = sin φ sin δ + cos φ cos δ cos H,  H = LAST − α
 *    (Meeus, Astronomical Algorithms, 2nd ed., eq. 13.6) on the apparent place of date; used by
 *    the "observable now" filter over every stored target;
 *  - tabulated (`ephemerisTables` + `siteEphemeris` + `instantAt`): many targets at many instants —
 *    the slowly varying parts (Earth's velocity, precession–nutation matrix, Sun and Moon
 *    directions, GAST) every 10 min, interpolated (linearly; the Moon's direction, which curves
 *    faster, by three-point Lagrange); the Earth's rotation enters exactly through the
 *    interpolated GAST. Used by the network plan, which evaluates millions of positions.
 *
 * Method. Positions of the Sun and Moon, precession, nutation and the Earth's rotation come from
 * astronomy-engine (VSOP87 / ELP truncated series, leading terms of IAU 2000B nutation, IAU 2006
 * precession; UT1 is taken equal to UTC, |UT1 − UTC| < 0.9 s). Annual aberration to first order
 * in v/c: u' = u + v/c − (u·v/c) u, renormalised (Meeus ch. 23 gives the classical form); light
 * deflection and diurnal aberration (< 0.4″ away from the Sun's limb) are neglected. Altitudes are
 * topocentric and geometric (no refraction) unless a field says "apparent"; azimuth is measured
 * from north through east. A distant source has no parallax, so its geocentric and topocentric
 * directions agree.
 *
 * Pure: no I/O, no framework.
 */
import {
	BaryState,
	Body,
	e_tilt,
	Equator,
	EquatorFromVector,
	GeoVector,
	HorizonFromVector,
	MakeTime,
	Observer,
	Refraction,
	RotateVector,
	Rotation_EQJ_EQD,
	Rotation_EQJ_HOR,
	SiderealTime,
	Vector,
	type AstroTime
} from 'astronomy-engine';
import { validateSite, validateTarget, type EquatorialTarget, type Site } from './observing-inputs.ts';
import { unitVector, type Vec3 } from './sky-geometry.ts';

export const DEG = Math.PI / 180;
/** Speed of light in AU per day (IAU 2012 au, c = 299 792.458 km/s). */
export const C_AU_PER_DAY = 173.144632674;
/** Ratio of sidereal to solar time (Meeus, Astronomical Algorithms, 2nd ed., ch. 12). */
export const SIDEREAL_PER_SOLAR = 1.00273790935;

// ---------------------------------------------------------------------------------------------
// Small helpers

/** astronomy-engine's observer for a site (longitude folded into −180…180); throws on a bad site. */
export function observerOf(site: Site): Observer {
	validateSite(site);
	const lon = site.longitudeDeg > 180 ? site.longitudeDeg - 360 : site.longitudeDeg;
	return new Observer(site.latitudeDeg, lon, site.elevationM);
}

export function normalizeDeg(x: number): number {
	const r = x % 360;
	return r < 0 ? r + 360 : r;
}

export function normalizeHours(x: number): number {
	const r = x % 24;
	return r < 0 ? r + 24 : r;
}

/** Hours folded into (−12, 12]. */
export function signedHours(x: number): number {
	const r = normalizeHours(x);
	return r > 12 ? r - 24 : r;
}

export function dot(a: Vec3, b: Vec3): number {
	return a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
}

export function unit(x: number, y: number, z: number): Vec3 {
	const r = Math.hypot(x, y, z);
	return [x / r, y / r, z / r];
}

function clampUnit(x: number): number {
	return x > 1 ? 1 : x < -1 ? -1 : x;
}

/** Angle between two directions, degrees (atan2 of |a × b| and a·b: stable at 0 and 180°). */
export function angleBetweenDeg(a: Vec3, b: Vec3): number {
	const cx = a[1] * b[2] - a[2] * b[1];
	const cy = a[2] * b[0] - a[0] * b[2];
	const cz = a[0] * b[1] - a[1] * b[0];
	return Math.atan2(Math.hypot(cx, cy, cz), dot(a, b)) / DEG;
}

/** Altitude (degrees) of a unit direction above the plane whose normal is `zenith`. */
export function altitudeFromZenithDeg(direction: Vec3, zenith: Vec3): number {
	return Math.asin(clampUnit(dot(direction, zenith))) / DEG;
}

// ---------------------------------------------------------------------------------------------
// The pieces every form shares

/** The Earth's barycentric velocity over c on J2000 axes (astronomy-engine BaryState): β of annual aberration. */
export function earthVelocityOverC(time: AstroTime): Vec3 {
	const earth = BaryState(Body.Earth, time);
	return [earth.vx / C_AU_PER_DAY, earth.vy / C_AU_PER_DAY, earth.vz / C_AU_PER_DAY];
}

/** Apparent direction of a distant source: u' = u + β − (u·β) u, renormalised (first-order annual aberration). */
export function aberrate(u: Vec3, beta: Vec3): Vec3 {
	const d = dot(u, beta);
	return unit(u[0] + beta[0] - d * u[0], u[1] + beta[1] - d * u[1], u[2] + beta[2] - d * u[2]);
}

/** Geocentric apparent unit vector of the Sun on J2000 axes (light time and aberration included). */
export function sunDirectionGeocentric(time: AstroTime): Vec3 {
	const s = GeoVector(Body.Sun, time, true);
	return unit(s.x, s.y, s.z);
}

/** Apparent direction of a fixed target on J2000 axes, as an astronomy-engine vector at `time`. */
export function apparentVectorJ2000(target: EquatorialTarget, time: Date): Vector {
	const t = MakeTime(time);
	const [x, y, z] = aberrate(unitVector(target.raDeg, target.decDeg), earthVelocityOverC(t));
	return new Vector(x, y, z, t);
}

// ---------------------------------------------------------------------------------------------
// Sidereal time

/**
 * Greenwich apparent sidereal time in hours [0, 24): the IAU 2006 expression on the Earth
 * rotation angle plus the equation of the equinoxes (leading terms of IAU 2000B nutation, good
 * to ~0.01 s of time), via astronomy-engine.
 * UT1 is taken as UTC.
 */
export function greenwichApparentSiderealTimeHours(time: Date): number {
	return SiderealTime(time);
}

/**
 * Greenwich mean sidereal time in hours [0, 24): GAST minus the equation of the equinoxes
 * Δψ·cos ε (Meeus, Astronomical Algorithms, 2nd ed., ch. 12), so both come from one model.
 */
export function greenwichMeanSiderealTimeHours(time: Date): number {
	const t = MakeTime(time);
	const equationOfEquinoxesSec = e_tilt(t).ee; // seconds of time
	return normalizeHours(SiderealTime(t) - equationOfEquinoxesSec / 3600);
}

/** Local sidereal time (hours) = Greenwich sidereal time + east longitude / 15. */
export function localSiderealTimeHours(time: Date, longitudeDeg: number, kind: 'mean' | 'apparent' = 'apparent'): number {
	const g = kind === 'mean' ? greenwichMeanSiderealTimeHours(time) : greenwichApparentSiderealTimeHours(time);
	return normalizeHours(g + longitudeDeg / 15);
}

// ---------------------------------------------------------------------------------------------
// Refraction and airmass

/**
 * Standard atmospheric refraction (degrees) to add to a geometric altitude: Saemundsson's
 * formula R = 1.02′ / tan(h + 10.3/(h + 5.11)) for 1010 hPa and 10 °C (Meeus, Astronomical
 * Algorithms, 2nd ed., eq. 16.4), as implemented by astronomy-engine's "normal" option.
 */
export function standardRefractionDeg(geometricAltitudeDeg: number): number {
	return Refraction('normal', geometricAltitudeDeg);
}

/**
 * Relative airmass by Kasten & Young (1989, Applied Optics 28, 4735, eq. 3):
 *   X = 1 / (sin h + 0.50572 · (h + 6.07995°)^−1.6364),  h = APPARENT (refracted) altitude in degrees.
 * The fit is to a sea-level ISO standard atmosphere and is given for the refracted altitude
 * (the zenith angle that pvlib's 'kastenyoung1989' model also takes as apparent). Returns null
 * below the apparent horizon (h < 0), where an airmass has no meaning for observing.
 */
export function airmassKastenYoung1989(apparentAltitudeDeg: number): number | null {
	if (!Number.isFinite(apparentAltitudeDeg) || apparentAltitudeDeg < 0) return null;
	const h = Math.min(apparentAltitudeDeg, 90);
	return 1 / (Math.sin(h * DEG) + 0.50572 * Math.pow(h + 6.07995, -1.6364));
}

// ---------------------------------------------------------------------------------------------
// Scalar form: one target, one instant

export interface HorizontalPosition {
	/** Altitude reported to the caller: geometric, or apparent when refraction was asked for. */
	altitudeDeg: number;
	azimuthDeg: number;
	geometricAltitudeDeg: number;
	/** Geometric altitude + standard sea-level refraction. */
	apparentAltitudeDeg: number;
	refraction: boolean;
	/** Kasten & Young (1989) on the apparent altitude; null below the horizon. */
	airmass: number | null;
	/** Local apparent sidereal time minus RA of date, in (−12, 12] hours (positive = west). */
	hourAngleHours: number;
	raOfDateDeg: number;
	decOfDateDeg: number;
}

/**
 * Topocentric horizontal position of a fixed ICRS/J2000 direction: annual aberration, then
 * J2000 → of-date equator (precession + nutation) → horizon by astronomy-engine's rotation
 * matrices. The RA/Dec of date returned are apparent (aberrated) too.
 */
export function targetAltAz(
	site: Site,
	target: EquatorialTarget,
	time: Date,
	options: { refraction?: boolean } = {}
): HorizontalPosition {
	validateTarget(target);
	const observer = observerOf(site);
	const v = apparentVectorJ2000(target, time);
	const hor = HorizonFromVector(RotateVector(Rotation_EQJ_HOR(time, observer), v), '');
	const geometricAltitudeDeg = hor.lat;
	const apparentAltitudeDeg = geometricAltitudeDeg + standardRefractionDeg(geometricAltitudeDeg);
	const ofDate = EquatorFromVector(RotateVector(Rotation_EQJ_EQD(time), v));
	const last = localSiderealTimeHours(time, observer.longitude, 'apparent');
	const refraction = options.refraction === true;
	return {
		altitudeDeg: refraction ? apparentAltitudeDeg : geometricAltitudeDeg,
		azimuthDeg: normalizeDeg(hor.lon),
		geometricAltitudeDeg,
		apparentAltitudeDeg,
		refraction,
		airmass: airmassKastenYoung1989(apparentAltitudeDeg),
		hourAngleHours: signedHours(last - ofDate.ra),
		raOfDateDeg: normalizeDeg(ofDate.ra * 15),
		decOfDateDeg: ofDate.dec
	};
}

/** Geometric topocentric altitude (degrees) of a fixed target: `targetAltAz` without the rest. */
export function targetGeometricAltitudeDeg(observer: Observer, target: EquatorialTarget, time: Date): number {
	const v = apparentVectorJ2000(target, time);
	return HorizonFromVector(RotateVector(Rotation_EQJ_HOR(time, observer), v), '').lat;
}

// ---------------------------------------------------------------------------------------------
// Vectorised form: many targets, one instant

/** Everything the per-target altitude needs that does not depend on the target, at one instant. */
export interface ApparentSky {
	latitudeDeg: number;
	/** Local apparent sidereal time, degrees. */
	lastDeg: number;
	/** Earth's barycentric velocity / c on J2000 axes (annual aberration). */
	beta: Vec3;
	/** J2000 → equator and equinox of date (precession + nutation), astronomy-engine's layout rot[i][j]. */
	rot: number[][];
	/** Geocentric apparent unit vector of the Sun on J2000 axes. */
	sun: Vec3;
}

/** The target-independent part of the apparent place at a site (latitude and longitude only) and instant. */
export function apparentSkyAt(site: { latitudeDeg: number; longitudeDeg: number }, now: Date): ApparentSky {
	const time = MakeTime(now);
	const lon = site.longitudeDeg > 180 ? site.longitudeDeg - 360 : site.longitudeDeg;
	return {
		latitudeDeg: site.latitudeDeg,
		lastDeg: localSiderealTimeHours(now, lon, 'apparent') * 15,
		beta: earthVelocityOverC(time),
		rot: Rotation_EQJ_EQD(time).rot,
		sun: sunDirectionGeocentric(time)
	};
}

/**
 * Geometric topocentric altitude (degrees) and geocentric solar elongation (degrees) of many fixed
 * ICRS directions at the instant of `sky`: aberration, precession–nutation, then the hour-angle
 * formula. The per-target steps are written out (not through `aberrate`) so that 10⁵ targets
 * allocate nothing; they are the same operations in the same order.
 */
export function altitudesNow(sky: ApparentSky, raDeg: Float64Array, decDeg: Float64Array): { altitudeDeg: Float64Array; sunSeparationDeg: Float64Array } {
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
		const d = ux * bx + uy * by + uz * bz;
		let x = ux + bx - d * ux;
		let y = uy + by - d * uy;
		let z = uz + bz - d * uz;
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

// ---------------------------------------------------------------------------------------------
// Tabulated form: many targets, many instants

/** Spacing of the tabulated slowly varying quantities. */
export const TABLE_STEP_MS = 600_000;

/** The site-independent tables over a time span. */
export interface EphemerisTables {
	t0: number;
	count: number;
	gastDeg: Float64Array; // unwrapped
	beta: Float64Array; // v/c, J2000 axes
	sunGeo: Float64Array;
	/** Rotation_EQJ_EQD matrices, 9 per node, astronomy-engine's rot[i][j] order. */
	precNut: Float64Array;
}

/** The tables of one site: its latitude and longitude, and the topocentric Sun and Moon directions. */
export interface SiteEphemeris {
	sinLat: number;
	cosLat: number;
	longitudeDeg: number;
	sunTopo: Float64Array;
	moonTopo: Float64Array;
}

/** What a target needs to know about one instant at one site. */
export interface ApparentInstant {
	ms: number;
	/** Zenith direction on J2000 axes (of-date zenith rotated back through precession-nutation). */
	zenith: Vec3;
	beta: Vec3;
	sunGeo: Vec3;
	moonTopo: Vec3;
	sunAltitudeDeg: number;
}

/** Tables from `t0Ms` to a little past `t1Ms`, one node every TABLE_STEP_MS. */
export function ephemerisTables(t0Ms: number, t1Ms: number): EphemerisTables {
	const count = Math.ceil((t1Ms - t0Ms) / TABLE_STEP_MS) + 3;
	const gastDeg = new Float64Array(count);
	const beta = new Float64Array(count * 3);
	const sunGeo = new Float64Array(count * 3);
	const precNut = new Float64Array(count * 9);
	let previous = 0;
	for (let k = 0; k < count; k++) {
		const time = MakeTime(new Date(t0Ms + k * TABLE_STEP_MS));
		let g = SiderealTime(time) * 15;
		if (k > 0) while (g < previous) g += 360;
		gastDeg[k] = previous = g;
		beta.set(earthVelocityOverC(time), k * 3);
		sunGeo.set(sunDirectionGeocentric(time), k * 3);
		const rot = Rotation_EQJ_EQD(time).rot;
		for (let i = 0; i < 3; i++) for (let j = 0; j < 3; j++) precNut[k * 9 + i * 3 + j] = rot[i][j];
	}
	return { t0: t0Ms, count, gastDeg, beta, sunGeo, precNut };
}

/** A site's tables on the nodes of `tables` (topocentric Sun and Moon, as `Equator(…, observer, false, true)`). */
export function siteEphemeris(tables: EphemerisTables, site: Site): SiteEphemeris {
	const observer = observerOf(site);
	const sunTopo = new Float64Array(tables.count * 3);
	const moonTopo = new Float64Array(tables.count * 3);
	for (let k = 0; k < tables.count; k++) {
		const time = MakeTime(new Date(tables.t0 + k * TABLE_STEP_MS));
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

/** The instant `ms` at a site, interpolated from the tables (inside the span they were built for). */
export function instantAt(g: EphemerisTables, s: SiteEphemeris, ms: number): ApparentInstant {
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
	const sunAltitudeDeg = altitudeFromZenithDeg(sunTopo, zenith);
	return { ms, zenith, beta, sunGeo: lerpVec(g.sunGeo, k, f), moonTopo: quadVec(s.moonTopo, g.count, x), sunAltitudeDeg };
}
