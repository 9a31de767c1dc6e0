/**
 * Night windows, horizontal coordinates, airmass and sidereal time for an observing site.
 *
 * Pure: no I/O, no framework. Positions of the Sun and Moon, precession, nutation and the
 * Earth's rotation come from astronomy-engine (VSOP87 / ELP truncated series, leading terms of
 * IAU 2000B nutation, IAU 2006 precession; UT1 is taken equal to UTC, |UT1 − UTC| < 0.9 s).
 * Conventions (see docs/night.md):
 *  - altitudes are topocentric and geometric (no refraction) unless a field says "apparent";
 *  - azimuth is measured from north through east;
 *  - sunset/sunrise: the Sun's centre at −0.833° geometric altitude; twilights: −12° / −18°;
 *  - "the night of local date D" is bounded by the Sun's upper transits around the lower
 *    transit that follows local mean noon of D (mean solar time = UTC + longitude/15 h).
 */
import {
	AngleBetween,
	BaryState,
	Body,
	e_tilt,
	Equator,
	EquatorFromVector,
	GeoVector,
	Horizon,
	HorizonFromVector,
	Illumination,
	MakeTime,
	MoonPhase,
	Observer,
	Refraction,
	RotateVector,
	Rotation_EQJ_EQD,
	Rotation_EQJ_HOR,
	SearchAltitude,
	SearchHourAngle,
	SiderealTime,
	Vector,
	type AstroTime
} from 'astronomy-engine';

/** Geographic site: geodetic latitude/longitude (east positive) on WGS-84, height above sea level. */
export interface Site {
	latitudeDeg: number;
	longitudeDeg: number;
	elevationM: number;
}

/** A fixed target in ICRS (J2000) equatorial coordinates. */
export interface EquatorialTarget {
	raDeg: number;
	decDeg: number;
}

/** A calendar date with no time zone: interpreted at the site by mean solar time. */
export interface LocalDate {
	year: number;
	month: number;
	day: number;
}

/** Altitude of the Sun's centre at sunset and sunrise: 16′ semi-diameter + 34′ standard refraction. */
export const SUNSET_ALTITUDE_DEG = -0.833;
/** Sun's centre at nautical twilight. */
export const NAUTICAL_TWILIGHT_ALTITUDE_DEG = -12;
/** Sun's centre at astronomical twilight. */
export const ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG = -18;

/** Ratio of sidereal to solar time (Meeus, Astronomical Algorithms, 2nd ed., ch. 12). */
const SIDEREAL_PER_SOLAR = 1.00273790935;
const DEG = Math.PI / 180;

// ---------------------------------------------------------------------------------------------
// Input checks (throw with a one-line reason; the CLI prints it)

function finite(name: string, value: number): void {
	if (typeof value !== 'number' || !Number.isFinite(value)) {
		throw new Error(`${name} must be a finite number, got ${String(value)}`);
	}
}

/** Throws unless the site is on the Earth's surface (or near it). */
export function validateSite(site: Site): void {
	finite('latitude', site.latitudeDeg);
	finite('longitude', site.longitudeDeg);
	finite('elevation', site.elevationM);
	if (site.latitudeDeg < -90 || site.latitudeDeg > 90) {
		throw new Error(`latitude ${site.latitudeDeg} is outside −90…90 degrees`);
	}
	if (site.longitudeDeg < -180 || site.longitudeDeg > 360) {
		throw new Error(`longitude ${site.longitudeDeg} is outside −180…360 degrees (east positive)`);
	}
	// Deeper than the Dead Sea shore or higher than any summit is a typo, not a site.
	if (site.elevationM < -500 || site.elevationM > 9000) {
		throw new Error(`elevation ${site.elevationM} m is outside −500…9000 m`);
	}
}

/** Throws unless RA is in [0, 360] and Dec in [−90, 90] degrees. */
export function validateTarget(target: EquatorialTarget): void {
	finite('ra', target.raDeg);
	finite('dec', target.decDeg);
	if (target.raDeg < 0 || target.raDeg > 360) {
		throw new Error(`ra ${target.raDeg} is outside 0…360 degrees`);
	}
	if (target.decDeg < -90 || target.decDeg > 90) {
		throw new Error(`dec ${target.decDeg} is outside −90…90 degrees`);
	}
}

/** Parses a strict `YYYY-MM-DD` calendar date; throws on anything else (e.g. 2025-02-30). */
export function parseLocalDate(text: string): LocalDate {
	const m = /^(\d{4})-(\d{2})-(\d{2})$/.exec(text ?? '');
	if (!m) throw new Error(`date "${text}" is not of the form YYYY-MM-DD`);
	const [year, month, day] = [Number(m[1]), Number(m[2]), Number(m[3])];
	const probe = new Date(Date.UTC(year, month - 1, day));
	if (probe.getUTCFullYear() !== year || probe.getUTCMonth() !== month - 1 || probe.getUTCDate() !== day) {
		throw new Error(`date "${text}" is not a calendar date`);
	}
	return { year, month, day };
}

/**
 * Parses an ISO-8601 date-time (`YYYY-MM-DDTHH:MM[:SS[.fff]][Z|±HH:MM]`). A time without a zone
 * is read as UTC, since every time this tool prints is UTC.
 */
export function parseUtcTime(text: string): Date {
	const m = /^(\d{4}-\d{2}-\d{2})[T ](\d{2}):(\d{2})(?::(\d{2})(\.\d+)?)?(Z|[+-]\d{2}:?\d{2})?$/i.exec(text ?? '');
	if (!m) throw new Error(`time "${text}" is not an ISO-8601 date-time such as 2026-03-01T04:30:00Z`);
	parseLocalDate(m[1]);
	const [hh, mm, ss] = [Number(m[2]), Number(m[3]), Number(m[4] ?? 0)];
	if (hh > 23 || mm > 59 || ss > 60) throw new Error(`time "${text}" has an out-of-range clock value`);
	const zone = m[6] ? (m[6].toUpperCase() === 'Z' ? 'Z' : m[6].replace(/^([+-]\d{2})(\d{2})$/, '$1:$2')) : 'Z';
	const date = new Date(`${m[1]}T${m[2]}:${m[3]}:${String(ss).padStart(2, '0')}${m[5] ?? ''}${zone}`);
	if (Number.isNaN(date.getTime())) throw new Error(`time "${text}" could not be read`);
	return date;
}

// ---------------------------------------------------------------------------------------------
// Small helpers

function observerOf(site: Site): Observer {
	validateSite(site);
	const lon = site.longitudeDeg > 180 ? site.longitudeDeg - 360 : site.longitudeDeg;
	return new Observer(site.latitudeDeg, lon, site.elevationM);
}

function normalizeDeg(x: number): number {
	const r = x % 360;
	return r < 0 ? r + 360 : r;
}

function normalizeHours(x: number): number {
	const r = x % 24;
	return r < 0 ? r + 24 : r;
}

/** Hours folded into (−12, 12]. */
function signedHours(x: number): number {
	const r = normalizeHours(x);
	return r > 12 ? r - 24 : r;
}

function toDate(t: AstroTime | Date): Date {
	return t instanceof Date ? t : t.date;
}

function iso(t: AstroTime | Date | null): string | null {
	return t === null ? null : toDate(t).toISOString();
}

function unitVectorJ2000(target: EquatorialTarget, time: Date): Vector {
	const ra = target.raDeg * DEG;
	const dec = target.decDeg * DEG;
	return new Vector(Math.cos(dec) * Math.cos(ra), Math.cos(dec) * Math.sin(ra), Math.sin(dec), MakeTime(time));
}

/** Speed of light in AU per day (IAU 2012 au, c = 299 792.458 km/s). */
const C_AU_PER_DAY = 173.144632674;

/**
 * Apparent direction of a distant source on J2000 axes: annual aberration to first order in v/c,
 * u' = u + v/c − (u·v/c) u, renormalized (Meeus ch. 23 gives the classical form). The Earth's
 * barycentric velocity comes from astronomy-engine. Light deflection and diurnal aberration
 * (< 0.4″ away from the Sun's limb) are neglected.
 */
function apparentVectorJ2000(target: EquatorialTarget, time: Date): Vector {
	const u = unitVectorJ2000(target, time);
	const earth = BaryState(Body.Earth, u.t);
	const [bx, by, bz] = [earth.vx / C_AU_PER_DAY, earth.vy / C_AU_PER_DAY, earth.vz / C_AU_PER_DAY];
	const dot = u.x * bx + u.y * by + u.z * bz;
	const [x, y, z] = [u.x + bx - dot * u.x, u.y + by - dot * u.y, u.z + bz - dot * u.z];
	const r = Math.hypot(x, y, z);
	return new Vector(x / r, y / r, z / r, u.t);
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
// Target position

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

/** Geometric topocentric altitude (degrees) of a fixed target, the quantity windows are cut on. */
function targetGeometricAltitudeDeg(observer: Observer, target: EquatorialTarget, time: Date): number {
	const v = apparentVectorJ2000(target, time);
	return HorizonFromVector(RotateVector(Rotation_EQJ_HOR(time, observer), v), '').lat;
}

// ---------------------------------------------------------------------------------------------
// Sun and Moon

export interface BodyPosition {
	/** Topocentric apparent direction on J2000 axes (comparable to astropy's GCRS). */
	raDeg: number;
	decDeg: number;
	/** Geometric topocentric altitude. */
	altitudeDeg: number;
	azimuthDeg: number;
	distanceKm: number;
}

const AU_KM = 149_597_870.7;

function bodyPosition(body: Body, site: Site, time: Date): BodyPosition {
	const observer = observerOf(site);
	const j2000 = Equator(body, time, observer, false, true);
	const ofDate = Equator(body, time, observer, true, true);
	const hor = Horizon(time, observer, ofDate.ra, ofDate.dec);
	return {
		raDeg: normalizeDeg(j2000.ra * 15),
		decDeg: j2000.dec,
		altitudeDeg: hor.altitude,
		azimuthDeg: normalizeDeg(hor.azimuth),
		distanceKm: j2000.dist * AU_KM
	};
}

/** Topocentric position of the Sun (astronomy-engine VSOP87 series). */
export function sunPosition(site: Site, time: Date): BodyPosition {
	return bodyPosition(Body.Sun, site, time);
}

/** Topocentric position of the Moon (astronomy-engine's truncated ELP / Chapront series). */
export function moonPosition(site: Site, time: Date): BodyPosition {
	return bodyPosition(Body.Moon, site, time);
}

export interface MoonPhaseInfo {
	/** Illuminated fraction of the disc, (1 + cos i)/2 with i the phase angle (Meeus eq. 48.1). */
	illumination: number;
	/** Sun–Moon–Earth angle, degrees: 0 at full, 180 at new. */
	phaseAngleDeg: number;
	/** Moon's ecliptic longitude minus the Sun's, degrees [0, 360): 0 new, 90 first quarter, 180 full. */
	phaseLongitudeDeg: number;
	waxing: boolean;
}

/** Geocentric Moon phase (astronomy-engine Illumination / MoonPhase). */
export function moonPhase(time: Date): MoonPhaseInfo {
	const info = Illumination(Body.Moon, time);
	const lon = MoonPhase(time);
	return {
		illumination: info.phase_fraction,
		phaseAngleDeg: info.phase_angle,
		phaseLongitudeDeg: lon,
		waxing: lon < 180
	};
}

/** Great-circle distance (degrees) between two RA/Dec directions (Vincenty form, stable at 0 and 180°). */
export function angularSeparationDeg(a: EquatorialTarget, b: EquatorialTarget): number {
	const [ra1, d1, ra2, d2] = [a.raDeg * DEG, a.decDeg * DEG, b.raDeg * DEG, b.decDeg * DEG];
	const dra = ra2 - ra1;
	const y = Math.hypot(Math.cos(d2) * Math.sin(dra), Math.cos(d1) * Math.sin(d2) - Math.sin(d1) * Math.cos(d2) * Math.cos(dra));
	const x = Math.sin(d1) * Math.sin(d2) + Math.cos(d1) * Math.cos(d2) * Math.cos(dra);
	return Math.atan2(y, x) / DEG;
}

function separationFromBodyDeg(body: Body, target: EquatorialTarget, time: Date, site?: Site): number {
	validateTarget(target);
	const t = MakeTime(time);
	// Topocentric for the Moon (parallax up to ~1°); geocentric is enough for the Sun (8.8″).
	const pos = site ? Equator(body, t, observerOf(site), false, true).vec : GeoVector(body, t, true);
	return AngleBetween(apparentVectorJ2000(target, time), pos);
}

/** Topocentric angular distance (degrees) from the target to the Moon's centre. */
export function moonSeparationDeg(site: Site, target: EquatorialTarget, time: Date): number {
	return separationFromBodyDeg(Body.Moon, target, time, site);
}

/** Angular distance (degrees) from the target to the Sun's centre; geocentric when no site is given. */
export function sunSeparationDeg(target: EquatorialTarget, time: Date, site?: Site): number {
	return separationFromBodyDeg(Body.Sun, target, time, site);
}

export interface SunAvoidanceVerdict {
	ok: boolean;
	elongationDeg: number;
	minElongationDeg: number;
	reason: string;
}

/**
 * Solar-elongation check: a pointing is refused when the target is closer to the Sun than the
 * telescope's limit (protects optics and keeps out of scattered light; limits are per instrument).
 */
export function sunAvoidance(target: EquatorialTarget, time: Date, minElongationDeg: number): SunAvoidanceVerdict {
	finite('minimum solar elongation', minElongationDeg);
	if (minElongationDeg < 0 || minElongationDeg > 180) {
		throw new Error(`minimum solar elongation ${minElongationDeg} is outside 0…180 degrees`);
	}
	const elongationDeg = sunSeparationDeg(target, time);
	const ok = elongationDeg >= minElongationDeg;
	const reason = ok
		? `target is ${elongationDeg.toFixed(1)}° from the Sun, outside the ${minElongationDeg}° avoidance limit`
		: `target is ${elongationDeg.toFixed(1)}° from the Sun, inside the ${minElongationDeg}° avoidance limit`;
	return { ok, elongationDeg, minElongationDeg, reason };
}

// ---------------------------------------------------------------------------------------------
// Night

export interface SunCrossings {
	altitudeDeg: number;
	/** The Sun's centre descends through altitudeDeg (evening). */
	evening: string | null;
	/** The Sun's centre ascends through altitudeDeg (morning). */
	morning: string | null;
	/** Why a time is null; null when both exist. */
	reason: string | null;
	/** 'normal' | 'always-above' (no such darkness) | 'always-below' (dark for the whole window) | 'partial'. */
	kind: 'normal' | 'always-above' | 'always-below' | 'partial';
}

export interface NightInfo {
	date: string;
	site: Site;
	/** Local mean noon of the date (UTC), where the search starts. */
	localMeanNoon: string;
	/** The Sun's lower transit that the night is centred on. */
	solarMidnight: string;
	/** Upper transits bracketing the night. */
	windowStart: string;
	windowEnd: string;
	sunset: SunCrossings;
	nautical: SunCrossings;
	astronomical: SunCrossings;
	/** Sun's geometric altitude at solar midnight. */
	sunMinAltitudeDeg: number;
	/** Midpoint of sunset–sunrise, or solar midnight when either is missing. */
	midpoint: string;
	moon: MoonPhaseInfo & BodyPosition;
	/** Astronomical darkness as an interval (whole window in polar night); null when none. */
	darkness: { start: string; end: string; hours: number } | null;
}

function sunGeometricAltitudeDeg(observer: Observer, t: AstroTime): number {
	const ofDate = Equator(Body.Sun, t, observer, true, true);
	return Horizon(t, observer, ofDate.ra, ofDate.dec).altitude;
}

function crossings(
	observer: Observer,
	altitudeDeg: number,
	prevNoon: AstroTime,
	midnight: AstroTime,
	nextNoon: AstroTime
): SunCrossings {
	const minAlt = sunGeometricAltitudeDeg(observer, midnight);
	const label = `${altitudeDeg}°`;
	if (minAlt >= altitudeDeg) {
		return {
			altitudeDeg,
			evening: null,
			morning: null,
			kind: 'always-above',
			reason: `the Sun's centre stays above ${label} all night (lowest ${minAlt.toFixed(2)}° at solar midnight)`
		};
	}
	const prevMax = sunGeometricAltitudeDeg(observer, prevNoon);
	const nextMax = sunGeometricAltitudeDeg(observer, nextNoon);
	// Between an upper and a lower transit the Sun's altitude is monotonic (to within its slow
	// change in declination), so each half-window holds at most one crossing.
	const evening =
		prevMax > altitudeDeg ? SearchAltitude(Body.Sun, observer, -1, midnight, -(midnight.ut - prevNoon.ut) - 1e-6, altitudeDeg) : null;
	const morning =
		nextMax > altitudeDeg ? SearchAltitude(Body.Sun, observer, +1, midnight, nextNoon.ut - midnight.ut + 1e-6, altitudeDeg) : null;
	if (evening && morning) return { altitudeDeg, evening: iso(evening), morning: iso(morning), kind: 'normal', reason: null };
	if (!evening && !morning) {
		return {
			altitudeDeg,
			evening: null,
			morning: null,
			kind: 'always-below',
			reason: `the Sun's centre stays below ${label} for the whole day (polar night)`
		};
	}
	return {
		altitudeDeg,
		evening: iso(evening),
		morning: iso(morning),
		kind: 'partial',
		reason: evening
			? `the Sun's centre does not come back above ${label} before the next solar noon`
			: `the Sun's centre was already below ${label} since before the previous solar noon`
	};
}

/** Local mean noon of a date, as UTC: 12:00 mean solar time = 12:00 UTC − longitude/15 h. */
export function localMeanNoonUtc(date: LocalDate, longitudeDeg: number): Date {
	const lon = longitudeDeg > 180 ? longitudeDeg - 360 : longitudeDeg;
	return new Date(Date.UTC(date.year, date.month - 1, date.day, 12) - (lon / 15) * 3_600_000);
}

/**
 * The night that begins on the evening of a local date at a site.
 *
 * "Local" is mean solar time at the site's longitude (UTC + lon/15 h), not a civil time zone.
 * The night is centred on the Sun's first lower transit (hour angle 12 h) after local mean noon
 * of the date, i.e. the night whose midpoint is nearest local midnight; it is bounded by the
 * upper transits before and after. Within those bounds the evening/morning crossings of the
 * Sun's centre (geometric, topocentric) through −0.833°, −12° and −18° are found by
 * astronomy-engine's SearchAltitude. Moon phase and position are given at the midpoint.
 */
export function nightWindow(site: Site, date: LocalDate | string): NightInfo {
	const local = typeof date === 'string' ? parseLocalDate(date) : date;
	const observer = observerOf(site);
	const noon = localMeanNoonUtc(local, observer.longitude);
	const midnight = SearchHourAngle(Body.Sun, observer, 12, noon, +1).time;
	const prevNoon = SearchHourAngle(Body.Sun, observer, 0, midnight, -1).time;
	const nextNoon = SearchHourAngle(Body.Sun, observer, 0, midnight, +1).time;

	const sunset = crossings(observer, SUNSET_ALTITUDE_DEG, prevNoon, midnight, nextNoon);
	const nautical = crossings(observer, NAUTICAL_TWILIGHT_ALTITUDE_DEG, prevNoon, midnight, nextNoon);
	const astronomical = crossings(observer, ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG, prevNoon, midnight, nextNoon);

	const midpointMs =
		sunset.evening && sunset.morning
			? (Date.parse(sunset.evening) + Date.parse(sunset.morning)) / 2
			: midnight.date.getTime();
	const midpoint = new Date(midpointMs);

	let darkness: NightInfo['darkness'] = null;
	if (astronomical.kind !== 'always-above') {
		const start = astronomical.evening ?? prevNoon.date.toISOString();
		const end = astronomical.morning ?? nextNoon.date.toISOString();
		darkness = { start, end, hours: (Date.parse(end) - Date.parse(start)) / 3_600_000 };
	}

	const ymd = `${String(local.year).padStart(4, '0')}-${String(local.month).padStart(2, '0')}-${String(local.day).padStart(2, '0')}`;
	return {
		date: ymd,
		site: { ...site },
		localMeanNoon: noon.toISOString(),
		solarMidnight: midnight.date.toISOString(),
		windowStart: prevNoon.date.toISOString(),
		windowEnd: nextNoon.date.toISOString(),
		sunset,
		nautical,
		astronomical,
		sunMinAltitudeDeg: sunGeometricAltitudeDeg(observer, midnight),
		midpoint: midpoint.toISOString(),
		moon: { ...moonPhase(midpoint), ...moonPosition(site, midpoint) },
		darkness
	};
}

// ---------------------------------------------------------------------------------------------
// Observable window of a target within darkness

export interface ObservableInterval {
	start: string;
	end: string;
	hours: number;
	/** What opens the interval: the start of darkness, or the target rising through the limit. */
	startsBy: 'darkness' | 'rise';
	endsBy: 'darkness' | 'set';
}

export interface ObservableWindow {
	minAltitudeDeg: number;
	intervals: ObservableInterval[];
	totalHours: number;
	/** Highest geometric altitude reached during darkness, and when. */
	maxAltitudeDeg: number | null;
	maxAltitudeAt: string | null;
	reason: string | null;
}

/** Times (ms) when the target's hour angle is 0 or 12 h inside [t0, t1]: the only altitude extremes. */
function culminationsMs(observer: Observer, target: EquatorialTarget, t0: number, t1: number): number[] {
	const out: number[] = [];
	const mid = new Date((t0 + t1) / 2);
	const ha = targetAltAz(
		{ latitudeDeg: observer.latitude, longitudeDeg: observer.longitude, elevationM: observer.height },
		target,
		mid
	).hourAngleHours;
	// Hour angle advances at the sidereal rate; walk both extremes across the interval.
	const solarMsPerSiderealHour = 3_600_000 / SIDEREAL_PER_SOLAR;
	for (const targetHa of [0, 12]) {
		const dh = signedHours(targetHa - ha);
		const first = mid.getTime() + dh * solarMsPerSiderealHour;
		for (let k = -2; k <= 2; k++) {
			const t = first + k * 24 * solarMsPerSiderealHour;
			if (t > t0 && t < t1) out.push(t);
		}
	}
	return out;
}

/**
 * When a target is above a geometric altitude limit during astronomical darkness of a night.
 * Between the target's culminations its altitude is monotonic, so the interval is split at
 * the culminations and each piece holds at most one crossing, found by bisection to ~1 s.
 */
export function observableWindow(site: Site, target: EquatorialTarget, night: NightInfo, minAltitudeDeg: number): ObservableWindow {
	validateTarget(target);
	finite('minimum altitude', minAltitudeDeg);
	if (minAltitudeDeg < -90 || minAltitudeDeg > 90) throw new Error(`minimum altitude ${minAltitudeDeg} is outside −90…90 degrees`);
	const observer = observerOf(site);
	if (!night.darkness) {
		return { minAltitudeDeg, intervals: [], totalHours: 0, maxAltitudeDeg: null, maxAltitudeAt: null, reason: night.astronomical.reason ?? 'no astronomical darkness' };
	}
	const t0 = Date.parse(night.darkness.start);
	const t1 = Date.parse(night.darkness.end);
	const f = (ms: number) => targetGeometricAltitudeDeg(observer, target, new Date(ms)) - minAltitudeDeg;

	const knots = [t0, ...culminationsMs(observer, target, t0, t1), t1].sort((a, b) => a - b);
	const values = knots.map(f);
	let best = { alt: -Infinity, at: t0 };
	knots.forEach((t, i) => {
		if (values[i] + minAltitudeDeg > best.alt) best = { alt: values[i] + minAltitudeDeg, at: t };
	});

	const intervals: ObservableInterval[] = [];
	let openAt: number | null = values[0] >= 0 ? t0 : null;
	let openBy: 'darkness' | 'rise' = 'darkness';
	for (let i = 0; i + 1 < knots.length; i++) {
		const [a, b, fa, fb] = [knots[i], knots[i + 1], values[i], values[i + 1]];
		if (fa >= 0 === fb >= 0) continue;
		let [lo, hi, flo] = [a, b, fa];
		while (hi - lo > 500) {
			const m = (lo + hi) / 2;
			const fm = f(m);
			if (fm >= 0 === flo >= 0) [lo, flo] = [m, fm];
			else hi = m;
		}
		const cross = (lo + hi) / 2;
		if (fb >= 0) {
			openAt = cross;
			openBy = 'rise';
		} else if (openAt !== null) {
			intervals.push(makeInterval(openAt, cross, openBy, 'set'));
			openAt = null;
		}
	}
	if (openAt !== null) intervals.push(makeInterval(openAt, t1, openBy, 'darkness'));
	const totalHours = intervals.reduce((s, x) => s + x.hours, 0);
	return {
		minAltitudeDeg,
		intervals,
		totalHours,
		maxAltitudeDeg: best.alt,
		maxAltitudeAt: new Date(best.at).toISOString(),
		reason: intervals.length ? null : `the target stays below ${minAltitudeDeg}° during astronomical darkness (highest ${best.alt.toFixed(1)}°)`
	};
}

function makeInterval(a: number, b: number, startsBy: 'darkness' | 'rise', endsBy: 'darkness' | 'set'): ObservableInterval {
	return {
		start: new Date(a).toISOString(),
		end: new Date(b).toISOString(),
		hours: (b - a) / 3_600_000,
		startsBy,
		endsBy
	};
}
