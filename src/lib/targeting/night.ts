/**
 * Night windows at an observing site, and the window in which a target is observable in one.
 *
 * Pure: no I/O, no framework. Positions come from the astronomy core (apparent-place.ts) and the
 * Sun/Moon module (sun-moon.ts); root searches for the Sun's transits and altitude crossings from
 * astronomy-engine. Conventions (see docs/night.md):
 *  - altitudes are topocentric and geometric (no refraction);
 *  - sunset/sunrise: the Sun's centre at −0.833° geometric altitude; twilights: −12° / −18°;
 *  - "the night of local date D" is bounded by the Sun's upper transits around the lower
 *    transit that follows local mean noon of D (mean solar time = UTC + longitude/15 h).
 */
import { Body, Equator, Horizon, SearchAltitude, SearchHourAngle, type AstroTime, type Observer } from 'astronomy-engine';
import { observerOf, SIDEREAL_PER_SOLAR, signedHours, targetAltAz, targetGeometricAltitudeDeg } from './apparent-place.ts';
import { parseLocalDate, requireFinite, validateTarget, type EquatorialTarget, type LocalDate, type Site } from './observing-inputs.ts';
import { moonPhase, moonPosition, type BodyPosition, type MoonPhaseInfo } from './sun-moon.ts';

/** Altitude of the Sun's centre at sunset and sunrise: 16′ semi-diameter + 34′ standard refraction. */
export const SUNSET_ALTITUDE_DEG = -0.833;
/** Sun's centre at nautical twilight. */
export const NAUTICAL_TWILIGHT_ALTITUDE_DEG = -12;
/** Sun's centre at astronomical twilight. */
export const ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG = -18;

function iso(t: AstroTime | null): string | null {
	return t === null ? null : t.date.toISOString();
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
	requireFinite('minimum altitude', minAltitudeDeg);
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
