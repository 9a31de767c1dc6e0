/**
 * How bright a kilonova like the one that followed GW170817 would look at an event's distance,
 * to set the depth each telescope reached against it.
 *
 * Model: an AT2017gfo-like kilonova peaks near absolute magnitude M ≈ −16 in the optical
 * (from memory: AT2017gfo peaked near M ≈ −15.5 to −16 in the red optical bands about a day after
 * the merger). The apparent magnitude at luminosity distance d is m = M + 5 log10(d / 10 pc)
 * (the distance modulus). No K-correction, no extinction, no cosmology beyond using the map's
 * luminosity distance directly: at the few-hundred-Mpc distances of neutron-star mergers those
 * terms are tenths of a magnitude, below the spread of kilonova models themselves.
 */

/** Peak absolute magnitude of an AT2017gfo-like kilonova (from memory, see the module note). */
export const KILONOVA_PEAK_ABS_MAG = -16;

export const KILONOVA_MODEL = {
	name: 'AT2017gfo-like kilonova',
	peakAbsoluteMag: KILONOVA_PEAK_ABS_MAG,
	source:
		'peak absolute magnitude M = −16 (AT2017gfo, value from memory); apparent magnitude m = M + 5 log10(d / 10 pc), without K-correction or extinction.'
} as const;

/** Distance modulus μ = 5 log10(d / 10 pc) for a distance in Mpc. */
export function distanceModulus(distanceMpc: number): number {
	if (!(distanceMpc > 0)) throw new RangeError(`distance ${distanceMpc} Mpc must be positive`);
	return 5 * Math.log10((distanceMpc * 1e6) / 10);
}

/** Apparent magnitude of a source of absolute magnitude `absMag` at `distanceMpc`. */
export function apparentMagnitude(absMag: number, distanceMpc: number): number {
	return absMag + distanceModulus(distanceMpc);
}

export interface KilonovaExpectation {
	model: string;
	peakAbsoluteMag: number;
	source: string;
	distanceMpc: number;
	/** At the far side of the distance estimate (mean + 1σ), when a spread is known. */
	farDistanceMpc: number | null;
	expectedMag: number;
	expectedMagFar: number | null;
}

/** The expected peak apparent magnitude at the map's mean distance (and at mean + 1σ); null without a distance. */
export function kilonovaExpectation(distanceMeanMpc: number | null, distanceStdMpc: number | null): KilonovaExpectation | null {
	if (distanceMeanMpc === null || !(distanceMeanMpc > 0)) return null;
	const far = distanceStdMpc !== null && distanceStdMpc > 0 ? distanceMeanMpc + distanceStdMpc : null;
	return {
		model: KILONOVA_MODEL.name,
		peakAbsoluteMag: KILONOVA_MODEL.peakAbsoluteMag,
		source: KILONOVA_MODEL.source,
		distanceMpc: distanceMeanMpc,
		farDistanceMpc: far,
		expectedMag: apparentMagnitude(KILONOVA_PEAK_ABS_MAG, distanceMeanMpc),
		expectedMagFar: far === null ? null : apparentMagnitude(KILONOVA_PEAK_ABS_MAG, far)
	};
}
