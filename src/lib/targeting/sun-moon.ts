/**
 * The Sun and the Moon seen from a site: positions, the Moon's phase, a target's distance from
 * either, and the Sun-avoidance check. Positions from astronomy-engine (VSOP87 for the Sun, a
 * truncated ELP / Chapront series for the Moon); a target's apparent direction from
 * apparent-place.ts, so separations use the same aberrated place as altitudes.
 *
 * Pure: no I/O, no framework.
 */
import { AngleBetween, Body, Equator, GeoVector, Horizon, Illumination, MakeTime, MoonPhase } from 'astronomy-engine';
import { apparentVectorJ2000, normalizeDeg, observerOf } from './apparent-place.ts';
import { requireFinite, validateTarget, type EquatorialTarget, type Site } from './observing-inputs.ts';

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
	requireFinite('minimum solar elongation', minElongationDeg);
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
