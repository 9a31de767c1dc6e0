/**
 * A telescope as the pure modules see it: where it stands, what its camera covers on the sky and
 * the limits it observes within. Plain shapes, so that a stored telescope, a CLI's flags and a
 * test's literal all fit; the one home of a telescope's footprint and field-of-view area.
 *
 * Pure: no I/O, no framework.
 */
import type { Site } from './observing-inputs.ts';
import type { FootprintShape } from './sky-geometry.ts';

/** The camera's field of view as stored: a circle's diameter is its width (its height is ignored). */
export interface TelescopeOptics {
	fovShape: 'circle' | 'rectangle';
	fovWidthDeg: number;
	fovHeightDeg: number;
}

/** Where a telescope may point: altitude and airmass limits, Sun and Moon avoidance, degrees. */
export interface TelescopeLimits {
	minAltitudeDeg: number;
	maxAirmass: number;
	minSunSeparationDeg: number;
	minMoonSeparationDeg: number;
}

/**
 * Fields of view at least this large (deg²) tile the sky; smaller ones point at galaxies. Galaxy
 * targeting pays off when a field holds about one galaxy of the region, and at ≲ 1 deg² the
 * fields needed to tile a typical 90% region of tens to hundreds of deg² outnumber what a night
 * allows (common practice).
 */
export const WIDE_FIELD_MIN_DEG2 = 1;

/** The footprint a telescope's camera covers about its pointing (sky-geometry.ts and fields.ts shapes). */
export function footprintOf(t: TelescopeOptics): FootprintShape {
	return t.fovShape === 'circle' ? { shape: 'circle', diameterDeg: t.fovWidthDeg } : { shape: 'rectangle', widthDeg: t.fovWidthDeg, heightDeg: t.fovHeightDeg };
}

/** Area of a telescope's field of view, deg² (flat-sky: π (d/2)² or w × h). */
export function fovAreaDeg2(t: TelescopeOptics): number {
	return t.fovShape === 'circle' ? Math.PI * (t.fovWidthDeg / 2) ** 2 : t.fovWidthDeg * t.fovHeightDeg;
}

/** Whether the telescope tiles the sky in fields (true) or points at galaxies (false). */
export function isWideField(t: TelescopeOptics): boolean {
	return fovAreaDeg2(t) >= WIDE_FIELD_MIN_DEG2;
}

/** Just the site of a telescope (or of anything that carries one). */
export function siteOf(t: Site): Site {
	return { latitudeDeg: t.latitudeDeg, longitudeDeg: t.longitudeDeg, elevationM: t.elevationM };
}

/**
 * Lowest altitude a telescope may point at: its altitude limit, or the altitude of its airmass
 * limit by the plane-parallel secant law X = 1 / sin(alt) when that is higher (common practice).
 */
export function effectiveMinAltitudeDeg(t: Pick<TelescopeLimits, 'minAltitudeDeg' | 'maxAirmass'>): number {
	const fromAirmass = t.maxAirmass > 1 ? (Math.asin(1 / t.maxAirmass) * 180) / Math.PI : 90;
	return Math.max(t.minAltitudeDeg, fromAirmass);
}
