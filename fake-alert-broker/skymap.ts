/**
 * Invented multi-order (NUNIQ) HEALPix sky maps with distance layers, for the fake broker.
 *
 * Sky: a mixture of Fisher (von Mises–Fisher on the 2-sphere) blobs,
 *   p(n) = κ / (2π (1 − e^{−2κ})) · exp(κ (μ·n − 1)),  κ = 1/σ²  (σ in radians),
 * which integrates to 1 over the sphere (Fisher 1953; written in the overflow-free form).
 * Refinement: a pixel is split into its four nested children while the probability it could hold
 * (the density at its point nearest the blob centre times its area) exceeds a threshold.
 *
 * Distance: the ansatz of Singer et al. 2016 (ApJL 829 L15), per pixel
 *   p(r | n) = DISTNORM · r² · N(r; DISTMU, DISTSIGMA),  DISTNORM = 1 / ∫₀^∞ r² N(r; μ, σ) dr,
 * with (DISTMU, DISTSIGMA) found from a wanted conditional mean and standard deviation.
 */
import { gzipSync } from 'node:zlib';
import * as healpix from '@hscmap/healpix';
import { writeBinTable, type Card } from './fits.ts';

const DEG = Math.PI / 180;

export interface SkyComponent {
	raDeg: number;
	decDeg: number;
	/** 1σ radius of the blob, degrees. */
	widthDeg: number;
	/** Relative weight in the mixture (normalised over components). */
	weight?: number;
}

export interface DistanceSpec {
	/** Wanted conditional mean distance at the blob centre, Mpc. */
	meanMpc: number;
	/** Wanted conditional standard deviation, Mpc (std/mean must be below 1/√3). */
	stdMpc: number;
	/** Fractional change of the mean per radian of declination offset (a gentle gradient). */
	gradientPerRad?: number;
}

export interface SkymapSpec {
	components: SkyComponent[];
	distance: DistanceSpec;
	minOrder?: number;
	maxOrder?: number;
	/** Split a pixel while it could hold more probability than this. */
	splitThreshold?: number;
}

export interface MultiOrderMap {
	uniq: bigint[];
	probDensity: Float64Array; // per steradian
	distMu: Float64Array; // Mpc
	distSigma: Float64Array; // Mpc
	distNorm: Float64Array; // Mpc^-2
	maxOrder: number;
	minOrder: number;
}

/** NUNIQ = 4·4^order + ipix (IVOA MOC 1.1 / HEALPix multi-order convention), exact in BigInt. */
export function nuniq(order: number, ipix: number): bigint {
	return 4n * 4n ** BigInt(order) + BigInt(ipix);
}

/** Inverse of {@link nuniq}: order = ⌊log₂(uniq/4)/2⌋, ipix = uniq − 4·4^order. */
export function fromNuniq(uniq: bigint): { order: number; ipix: number } {
	if (uniq < 4n) throw new Error(`NUNIQ ${uniq} is below 4`);
	let order = 0;
	while (4n * 4n ** BigInt(order + 1) <= uniq) order++;
	return { order, ipix: Number(uniq - 4n * 4n ** BigInt(order)) };
}

/** Unit vector of (ra, dec) in degrees. */
export function radecToVec(raDeg: number, decDeg: number): [number, number, number] {
	const ra = raDeg * DEG;
	const dec = decDeg * DEG;
	return [Math.cos(dec) * Math.cos(ra), Math.cos(dec) * Math.sin(ra), Math.sin(dec)];
}

/** Centre of a nested pixel as (ra, dec) in degrees, with φ brought into [0, 2π). */
export function pixelCentreDeg(order: number, ipix: number): { raDeg: number; decDeg: number } {
	const { theta, phi } = healpix.pix2ang_nest(2 ** order, ipix);
	const twoPi = 2 * Math.PI;
	const ra = ((phi % twoPi) + twoPi) % twoPi;
	return { raDeg: ra / DEG, decDeg: 90 - theta / DEG };
}

/** Fisher density (per sr) at angular distance `angleRad` from the centre, for 1σ `sigmaRad`. */
export function fisherDensity(angleRad: number, sigmaRad: number): number {
	const kappa = 1 / (sigmaRad * sigmaRad);
	return (kappa / (2 * Math.PI * -Math.expm1(-2 * kappa))) * Math.exp(kappa * (Math.cos(angleRad) - 1));
}

// ---------------------------------------------------------------------------------------------
// Distance ansatz

/** Standard normal pdf. */
function phi(x: number): number {
	return Math.exp(-0.5 * x * x) / Math.sqrt(2 * Math.PI);
}

/**
 * Complementary error function, Chebyshev fit with fractional error below 1.2e-7 everywhere
 * (Press et al., Numerical Recipes, 2nd ed., §6.2 "erfcc").
 */
export function erfc(x: number): number {
	const z = Math.abs(x);
	const t = 1 / (1 + 0.5 * z);
	const r =
		t *
		Math.exp(
			-z * z -
				1.26551223 +
				t *
					(1.00002368 +
						t *
							(0.37409196 +
								t *
									(0.09678418 +
										t * (-0.18628806 + t * (0.27886807 + t * (-1.13520398 + t * (1.48851587 + t * (-0.82215223 + t * 0.17087277))))))))
		);
	return x >= 0 ? r : 2 - r;
}

/** Standard normal cdf. */
export function Phi(x: number): number {
	return 0.5 * erfc(-x / Math.SQRT2);
}

/**
 * ∫₀^∞ r^k N(r; μ, σ) dr for k = 0..4, from the moments of a standard normal truncated below at
 * −μ/σ (r = μ + σt): M0 = Φ(x), M1 = φ(x), M2 = Φ(x) − xφ(x), M3 = (x² + 2)φ(x),
 * M4 = 3Φ(x) − (x³ + 3x)φ(x), with x = μ/σ.
 */
export function truncatedMoments(mu: number, sigma: number): number[] {
	const x = mu / sigma;
	const P = Phi(x);
	const p = phi(x);
	const M = [P, p, P - x * p, (x * x + 2) * p, 3 * P - (x * x * x + 3 * x) * p];
	const binom = [[1], [1, 1], [1, 2, 1], [1, 3, 3, 1], [1, 4, 6, 4, 1]];
	return [0, 1, 2, 3, 4].map((k) => {
		let s = 0;
		for (let j = 0; j <= k; j++) s += binom[k][j] * mu ** (k - j) * sigma ** j * M[j];
		return s;
	});
}

/** Conditional mean and std of p(r) ∝ r² N(r; μ, σ) (Singer et al. 2016 ansatz), and DISTNORM. */
export function ansatzMoments(mu: number, sigma: number): { meanMpc: number; stdMpc: number; norm: number } {
	const m = truncatedMoments(mu, sigma);
	const mean = m[3] / m[2];
	const second = m[4] / m[2];
	return { meanMpc: mean, stdMpc: Math.sqrt(Math.max(0, second - mean * mean)), norm: 1 / m[2] };
}

/**
 * (DISTMU, DISTSIGMA, DISTNORM) whose ansatz has the wanted conditional mean and std.
 * The family is scale-free (μ, σ → kμ, kσ scales mean and std by k), so std/mean depends on
 * x = μ/σ alone and is found by bisection on x; then σ follows from the mean.
 */
export function distanceParameters(meanMpc: number, stdMpc: number): { mu: number; sigma: number; norm: number } {
	const ratio = stdMpc / meanMpc;
	if (!(meanMpc > 0) || !(stdMpc > 0)) throw new Error('distance mean and std must be positive');
	// As x → −∞ the ansatz tends to r² e^{−λr} (a gamma law) whose std/mean is 1/√3.
	if (ratio >= 1 / Math.sqrt(3) - 1e-3) throw new Error(`distance std/mean ${ratio.toFixed(3)} must be below 1/√3`);
	const ratioAt = (x: number) => {
		const m = ansatzMoments(x, 1);
		return m.stdMpc / m.meanMpc;
	};
	let lo = -20;
	let hi = 1e4;
	for (let i = 0; i < 200; i++) {
		const mid = 0.5 * (lo + hi);
		// std/mean falls as x grows.
		if (ratioAt(mid) > ratio) lo = mid;
		else hi = mid;
	}
	const x = 0.5 * (lo + hi);
	const unit = ansatzMoments(x, 1);
	const sigma = meanMpc / unit.meanMpc;
	const mu = x * sigma;
	return { mu, sigma, norm: ansatzMoments(mu, sigma).norm };
}

// ---------------------------------------------------------------------------------------------

/** Order whose pixels are about `sizeRad` across, in [lo, hi]. */
function orderForSize(sizeRad: number, lo: number, hi: number): number {
	// Mean pixel size at order o is √(4π / (12·4^o)) ≈ 1.0233 / 2^o radians.
	const o = Math.ceil(Math.log2(Math.sqrt(Math.PI / 3) / sizeRad));
	return Math.min(hi, Math.max(lo, o));
}

/** Build a multi-order map from a spec. Deterministic. */
export function generateSkymap(spec: SkymapSpec): MultiOrderMap {
	if (spec.components.length === 0) throw new Error('a sky map needs at least one component');
	const minOrder = spec.minOrder ?? 4;
	const narrowest = Math.min(...spec.components.map((c) => c.widthDeg)) * DEG;
	// Resolve the narrowest blob with pixels about σ/8 across, between orders minOrder+1 and 9.
	const maxOrder = spec.maxOrder ?? orderForSize(narrowest / 8, minOrder + 1, 9);
	const threshold = spec.splitThreshold ?? 1e-5;
	const totalWeight = spec.components.reduce((s, c) => s + (c.weight ?? 1), 0);
	const comps = spec.components.map((c) => ({
		v: radecToVec(c.raDeg, c.decDeg),
		sigma: c.widthDeg * DEG,
		w: (c.weight ?? 1) / totalWeight
	}));
	const angle = (a: number[], b: number[]) => {
		const d = a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
		return Math.acos(Math.min(1, Math.max(-1, d)));
	};

	const orders: number[] = [];
	const pixels: number[] = [];
	const densities: number[] = [];
	const decs: number[] = [];

	const visit = (order: number, ipix: number) => {
		const nside = 2 ** order;
		const v = healpix.pix2vec_nest(nside, ipix);
		const area = healpix.nside2pixarea(nside);
		if (order < maxOrder) {
			const rad = healpix.max_pixrad(nside);
			let upper = 0;
			for (const c of comps) upper += c.w * fisherDensity(Math.max(0, angle(v, c.v) - rad), c.sigma);
			if (upper * area > threshold) {
				for (let k = 0; k < 4; k++) visit(order + 1, 4 * ipix + k);
				return;
			}
		}
		let density = 0;
		for (const c of comps) density += c.w * fisherDensity(angle(v, c.v), c.sigma);
		orders.push(order);
		pixels.push(ipix);
		densities.push(density);
		decs.push(Math.asin(Math.max(-1, Math.min(1, v[2]))));
	};
	const nBase = 12 * 4 ** minOrder;
	for (let ipix = 0; ipix < nBase; ipix++) visit(minOrder, ipix);

	// Renormalise so that Σ density·area = 1 exactly for the pixelised map.
	let total = 0;
	for (let i = 0; i < densities.length; i++) total += densities[i] * healpix.nside2pixarea(2 ** orders[i]);

	const n = densities.length;
	const rows = Array.from({ length: n }, (_, i) => i).sort((a, b) => {
		const ua = nuniq(orders[a], pixels[a]);
		const ub = nuniq(orders[b], pixels[b]);
		return ua < ub ? -1 : ua > ub ? 1 : 0;
	});
	const out: MultiOrderMap = {
		uniq: [],
		probDensity: new Float64Array(n),
		distMu: new Float64Array(n),
		distSigma: new Float64Array(n),
		distNorm: new Float64Array(n),
		maxOrder: Math.max(...orders),
		minOrder
	};
	const d = spec.distance;
	const unit = distanceParameters(1, d.stdMpc / d.meanMpc);
	const dec0 = spec.components[0].decDeg * DEG;
	rows.forEach((src, i) => {
		out.uniq.push(nuniq(orders[src], pixels[src]));
		out.probDensity[i] = densities[src] / total;
		// The wanted mean drifts with declination; std/mean stays fixed, so the unit solution scales.
		const mean = d.meanMpc * Math.max(0.2, 1 + (d.gradientPerRad ?? 0) * (decs[src] - dec0));
		out.distMu[i] = unit.mu * mean;
		out.distSigma[i] = unit.sigma * mean;
		// ∫ r² N(r; kμ, kσ) dr = k² ∫ r² N(r; μ, σ) dr, so DISTNORM scales as 1/k².
		out.distNorm[i] = unit.norm / (mean * mean);
	});
	return out;
}

/** Serialise a map as a gzipped multi-order FITS file. */
export function skymapToFits(map: MultiOrderMap, meta: { object: string; dateObs: string; extra?: Card[] }): Buffer {
	// Overall distance mean/std over the whole sky: mixture moments of the per-pixel ansatz.
	let m1 = 0;
	let m2 = 0;
	for (let i = 0; i < map.uniq.length; i++) {
		const { order } = fromNuniq(map.uniq[i]);
		const p = map.probDensity[i] * healpix.nside2pixarea(2 ** order);
		const mom = ansatzMoments(map.distMu[i], map.distSigma[i]);
		m1 += p * mom.meanMpc;
		m2 += p * (mom.stdMpc ** 2 + mom.meanMpc ** 2);
	}
	const cards: Card[] = [
		{ key: 'PIXTYPE', value: 'HEALPIX', comment: 'HEALPIX pixelisation' },
		{ key: 'ORDERING', value: 'NUNIQ', comment: 'Pixel ordering scheme: RING, NESTED, or NUNIQ' },
		{ key: 'COORDSYS', value: 'C', comment: 'Ecliptic, Galactic or Celestial (equatorial)' },
		{ key: 'MOCORDER', value: map.maxOrder, comment: 'MOC resolution (best order)' },
		{ key: 'INDXSCHM', value: 'EXPLICIT', comment: 'Indexing: IMPLICIT or EXPLICIT' },
		{ key: 'OBJECT', value: meta.object, comment: 'Unique identifier for this event' },
		{ key: 'DATE-OBS', value: meta.dateObs, comment: 'UTC date of the observation' },
		{ key: 'CREATOR', value: 'strainline-fake-broker', comment: 'Program that created this file' },
		{ key: 'DISTMEAN', value: m1, comment: 'Posterior mean distance (Mpc)' },
		{ key: 'DISTSTD', value: Math.sqrt(Math.max(0, m2 - m1 * m1)), comment: 'Posterior standard deviation of distance (Mpc)' },
		...(meta.extra ?? [])
	];
	const fits = writeBinTable(
		[
			{ name: 'UNIQ', format: 'K', data: map.uniq },
			{ name: 'PROBDENSITY', format: 'D', unit: 'sr-1', data: map.probDensity },
			{ name: 'DISTMU', format: 'D', unit: 'Mpc', data: map.distMu },
			{ name: 'DISTSIGMA', format: 'D', unit: 'Mpc', data: map.distSigma },
			{ name: 'DISTNORM', format: 'D', unit: 'Mpc-2', data: map.distNorm }
		],
		cards,
		'PROB'
	);
	return gzipSync(fits, { level: 6 });
}
