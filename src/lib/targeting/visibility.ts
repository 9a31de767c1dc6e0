/**
 * Whether a telescope can observe a target: tonight at its site, a target's state now and its
 * window tonight (one target, exact), and the same test at one instant over many targets at once
 * (the "observable now" filter of the targets page).
 *
 * "Observable now" over every stored row cannot afford the per-target rise/set search of
 * `visibility()` (an observable window is a few dozen altitude evaluations per target). It is the
 * same test evaluated at one instant only: darkness now (once per request), then per target the
 * geometric altitude and solar elongation from the vectorised form of the astronomy core
 * (apparent-place.ts `altitudesNow`). The full `visibility()` then runs for the rows of a page only.
 *
 * Pure: no I/O, no framework.
 */
import { altitudesNow, apparentSkyAt, targetAltAz, type ApparentSky } from './apparent-place.ts';
import { nightWindow, observableWindow, type NightInfo } from './night.ts';
import type { EquatorialTarget, Site } from './observing-inputs.ts';
import { moonSeparationDeg, sunAvoidance } from './sun-moon.ts';
import { effectiveMinAltitudeDeg, siteOf, type TelescopeLimits } from './telescope.ts';

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

/** Tonight at a telescope's site. */
export function tonightFor(t: Site, now: Date): NightInfo {
	return tonight(siteOf(t), now);
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

/** A target as a telescope sees it now and tonight (`night`: tonight at the telescope's site). */
export function visibility(t: Site & TelescopeLimits, night: NightInfo, target: EquatorialTarget, now: Date): Visibility {
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

/** The sky at one instant for one telescope: the apparent place's shared part, darkness and the limits. */
export interface SkyNow extends ApparentSky {
	/** Astronomical darkness at this instant (per the telescope's night). */
	dark: boolean;
	minAltitudeDeg: number;
	minSunSeparationDeg: number;
}

/** Everything the per-target test needs that does not depend on the target: computed once. */
export function skyNow(
	t: Pick<Site, 'latitudeDeg' | 'longitudeDeg'> & Pick<TelescopeLimits, 'minAltitudeDeg' | 'maxAirmass' | 'minSunSeparationDeg'>,
	night: NightInfo | null,
	now: Date
): SkyNow {
	const darkness = night?.darkness ?? null;
	const nowMs = now.getTime();
	return {
		...apparentSkyAt(t, now),
		dark: Boolean(darkness && Date.parse(darkness.start) <= nowMs && nowMs < Date.parse(darkness.end)),
		minAltitudeDeg: effectiveMinAltitudeDeg(t),
		minSunSeparationDeg: t.minSunSeparationDeg
	};
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
