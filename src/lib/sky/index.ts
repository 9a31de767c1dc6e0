/**
 * Sky-map engine: read a HEALPix probability map (multi-order NUNIQ or flat RING/NESTED,
 * optionally gzip) and answer the questions follow-up planning asks of it.
 */
import { credibleLevelAt, credibleRegions, peak as peakOf } from './credible.ts';
import { conditionalMoments, distanceTails, dPdV, hasDistance, marginalMoments } from './distance.ts';
import { areaTable, pixelAt, readSkyMap, type ReadSkyMapOptions, type SkyMap } from './moc.ts';
import { pixelAreaSr } from './coords.ts';

export * from './coords.ts';
export * from './credible.ts';
export * from './distance.ts';
export * from './fits.ts';
export * from './moc.ts';
export * from './raster.ts';

export interface SkymapSummary {
	area50: number;
	area90: number;
	/** Credible area at 99%, deg². */
	area99: number;
	distanceMean: number | null;
	distanceStd: number | null;
	pixels: number;
	maxOrder: number;
	probabilitySum: number;
	peak: { ra: number; dec: number };
	ordering: string;
	warnings: string[];
}

/** Probability of pixel i (density × solid angle). */
export function pixelProbabilityFn(map: SkyMap): (i: number) => number {
	const d = map.probDensity;
	if (map.order) {
		const areas = areaTable();
		const o = map.order;
		return (i) => d[i] * areas[o[i]];
	}
	const a = pixelAreaSr(map.maxOrder);
	return (i) => d[i] * a;
}

/** Summary of an already-read map: credible areas (deg²), marginal distance (Mpc), peak. */
export function summarise(map: SkyMap): SkymapSummary {
	const [r50, r90, r99] = credibleRegions(map, [0.5, 0.9, 0.99]);
	const dist =
		map.distMu && map.distSigma ? marginalMoments(pixelProbabilityFn(map), map.size, map.distMu, map.distSigma, map.distNorm) : null;
	const warnings = [...map.warnings];
	if (dist && dist.probabilityWithDistance < 0.999) {
		warnings.push(
			`${((1 - dist.probabilityWithDistance) * 100).toFixed(2)}% of the probability lies in pixels without distance information; excluded from the distance moments`
		);
	}
	const p = peakOf(map);
	return {
		area50: r50.areaDeg2,
		area90: r90.areaDeg2,
		area99: r99.areaDeg2,
		distanceMean: dist?.meanMpc ?? null,
		distanceStd: dist?.stdMpc ?? null,
		pixels: map.size,
		maxOrder: map.maxOrder,
		probabilitySum: map.probabilitySumRaw,
		peak: { ra: p.ra, dec: p.dec },
		ordering: map.ordering,
		warnings
	};
}

/** Read FITS bytes and summarise. */
export function analyseSkymap(bytes: Uint8Array, options: ReadSkyMapOptions = {}): SkymapSummary & { map: SkyMap } {
	const map = readSkyMap(bytes, options);
	return { ...summarise(map), map };
}

export interface LocateResult {
	credibleLevel: number;
	/** Per steradian. */
	probabilityDensity: number;
	distanceMean: number | null;
	distanceStd: number | null;
	/** Per Mpc³; present only when a distance was given. */
	dPdV?: number | null;
	/** F(distance) of the conditional distance posterior in this direction; present only when a distance was given. */
	distanceCdf?: number | null;
	/** Two-sided tail probability 2·min(F, 1 − F); present only when a distance was given. */
	distancePValue?: number | null;
}

/**
 * What the map says about one direction (RA/Dec degrees) and optionally a distance (Mpc):
 * credible level (probability in all denser pixels), density per sr, the conditional distance
 * posterior's mean/std, and at a distance dP/dV (Singer et al. 2016) with the posterior's cumulative
 * probability F there and the two-sided tail probability 2·min(F, 1 − F).
 */
export function locate(map: SkyMap, raDeg: number, decDeg: number, distanceMpc?: number): LocateResult {
	if (!Number.isFinite(raDeg) || !Number.isFinite(decDeg) || decDeg < -90 || decDeg > 90) {
		throw new RangeError(`invalid direction ra=${raDeg} dec=${decDeg}`);
	}
	const i = pixelAt(map, raDeg, decDeg);
	const density = i < 0 ? 0 : map.probDensity[i];
	const level = i < 0 ? 1 : credibleLevelAt(map, raDeg, decDeg);
	let mean: number | null = null;
	let std: number | null = null;
	let dpdv: number | null = null;
	let cdf: number | null = null;
	let pValue: number | null = null;
	if (i >= 0 && map.distMu && map.distSigma) {
		const mu = map.distMu[i];
		const sigma = map.distSigma[i];
		const norm = map.distNorm ? map.distNorm[i] : NaN;
		const c = hasDistance(mu, sigma, norm) ? conditionalMoments(mu, sigma) : null;
		mean = c?.meanMpc ?? null;
		std = c?.stdMpc ?? null;
		if (distanceMpc !== undefined && c) {
			dpdv = dPdV(density, distanceMpc, mu, sigma, norm);
			const t = distanceTails(distanceMpc, mu, sigma);
			if (!Number.isNaN(t.cdf)) {
				cdf = t.cdf;
				pValue = Math.min(1, 2 * Math.min(t.cdf, t.sf));
			}
		}
	}
	const result: LocateResult = { credibleLevel: level, probabilityDensity: density, distanceMean: mean, distanceStd: std };
	if (distanceMpc !== undefined) {
		result.dPdV = dpdv;
		result.distanceCdf = cdf;
		result.distancePValue = pValue;
	}
	return result;
}
