/**
 * The rules an exposure of the network plan must satisfy at an instant, and the dark intervals of
 * a site, on the tabulated form of the astronomy core (apparent-place.ts). plan.spec.ts measures
 * the tabulated positions against the scalar form (≤ 1e-6° for altitudes and elongation, ≤ 1e-5°
 * for the Moon), and every limit is applied with a margin on the safe side, so that no exposure
 * gets through that the scalar form itself would refuse.
 *
 * Pure: no I/O, no framework.
 */
import { aberrate, airmassKastenYoung1989, altitudeFromZenithDeg, angleBetweenDeg, standardRefractionDeg, type ApparentInstant } from './apparent-place.ts';
import type { Vec3 } from './sky-geometry.ts';

/** Every limit is applied this much on the safe side (see the module comment). */
export const MARGIN_DEG = 1e-4;
export const AIRMASS_MARGIN = 1e-5;
/** Darkness edges are refined to this. */
const EDGE_PRECISION_MS = 1000;

/** How far a target gets through the constraints at an instant (for drop reasons). */
export const Stage = { Daylight: 0, Dark: 1, AboveAltitude: 2, WithinAirmass: 3, ClearOfSun: 4, Observable: 5 } as const;
export type Stage = (typeof Stage)[keyof typeof Stage];

export interface Sample {
	stage: Stage;
	altitudeDeg: number;
	airmass: number;
	sunSepDeg: number;
	moonSepDeg: number;
}

/** One telescope's limits, margins already applied. */
export interface Limits {
	sunAltitudeLimitDeg: number;
	minAltitudeDeg: number;
	maxAirmass: number;
	minSunSeparationDeg: number;
	minMoonSeparationDeg: number;
}

/** Geocentric solar elongation (degrees) of the J2000 unit vector `u` at an instant. */
export function sunElongationDeg(u: Vec3, at: ApparentInstant): number {
	return angleBetweenDeg(aberrate(u, at.beta), at.sunGeo);
}

/**
 * The constraints in order (darkness, altitude, airmass, solar elongation, Moon distance) for the
 * J2000 unit vector `u` at an instant; stops at the first one that fails.
 */
export function sampleAt(u: Vec3, at: ApparentInstant, limits: Limits): Sample {
	const out: Sample = { stage: Stage.Daylight, altitudeDeg: NaN, airmass: NaN, sunSepDeg: NaN, moonSepDeg: NaN };
	const a = aberrate(u, at.beta);
	out.altitudeDeg = altitudeFromZenithDeg(a, at.zenith);
	if (at.sunAltitudeDeg > limits.sunAltitudeLimitDeg) return out;
	out.stage = Stage.Dark;
	if (out.altitudeDeg < limits.minAltitudeDeg) return out;
	out.stage = Stage.AboveAltitude;
	const x = airmassKastenYoung1989(out.altitudeDeg + standardRefractionDeg(out.altitudeDeg));
	out.airmass = x ?? Infinity;
	if (x === null || x > limits.maxAirmass) return out;
	out.stage = Stage.WithinAirmass;
	out.sunSepDeg = angleBetweenDeg(a, at.sunGeo);
	if (out.sunSepDeg < limits.minSunSeparationDeg) return out;
	out.stage = Stage.ClearOfSun;
	out.moonSepDeg = angleBetweenDeg(a, at.moonTopo);
	if (out.moonSepDeg < limits.minMoonSeparationDeg) return out;
	out.stage = Stage.Observable;
	return out;
}

/**
 * Intervals inside [t0, t1] with the Sun at or below the limit: the `stepMs` grid, each
 * crossing refined by bisection to 1 s, both ends on the dark side. An interval shorter than
 * one step between two light samples can be missed.
 */
export function darkIntervals(
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
