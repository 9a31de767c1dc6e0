/**
 * Galaxy targeting: which catalogued galaxies inside a sky map's credible region are the best
 * places to look for the counterpart.
 *
 * Method: luminosity-weighted galaxy targeting with the 3-D sky map (Singer et al. 2016, ApJL 829
 * L15, §4; the luminosity weighting as in Gehrels et al. 2016, ApJ 820, 136 and Arcavi et al. 2017,
 * ApJL 848, L33 — from memory). The score of galaxy g at direction n_g, catalogued distance d_g ± σ_g:
 *
 *   score_g = ρ(n_g) · DISTNORM(n_g) · G(d_g, σ_g; μ, σ) · w_g
 *
 * where ρ is the probability density per steradian of the map pixel containing n_g, (μ, σ, DISTNORM)
 * its distance ansatz p(r|n) = DISTNORM r² N(r; μ, σ), and G the expectation of N(r; μ, σ) over the
 * galaxy's distance pdf, a normal N(r; d, σ_g) truncated to r > 0:
 *
 *   G = ∫₀^∞ N(r; μ, σ) N(r; d, σ_g) dr / Φ(d/σ_g).
 *
 * The product of two normal densities in r is N(d; μ, s) · N(r; m, τ) with
 *   s² = σ² + σ_g²,  m = (μ σ_g² + d σ²)/s²,  τ = σ σ_g / s,
 * so the integral over r > 0 is N(d; μ, s) Φ(m/τ) and
 *
 *   G = N(d; μ, s) · Φ(m/τ) / Φ(d/σ_g).
 *
 * With σ_g = 0 this is N(d; μ, σ), so ρ · DISTNORM · G is exactly dP/dV at the galaxy
 * (Singer et al. 2016 eq. 2 context, dV = r² dr dΩ): with equal weights the order is that of dP/dV.
 *
 * Weight w: the catalogue's luminosity proxy (B-band luminosity by default), because the merger
 * rate of compact binaries is expected to follow stellar mass / star formation, which B (and better
 * K) luminosity traces (common practice; the references above). Directions whose pixel carries no
 * distance information get no 3-D score and are counted apart; a map without distance columns is
 * ranked in 2-D by ρ · w.
 *
 * Index: galaxies bucketed by HEALPix NESTED pixel at INDEX_ORDER (= 8, nside 256, pixels of
 * 0.052 deg², ~13.7′ across), sorted by pixel with an offsets table, so that a region query reads
 * only the galaxies in the pixels covering the region.
 */
import {
	credibleRegions,
	distancePValue,
	hasDistance,
	marginalMoments,
	nestedPixel,
	normalCdf,
	npix,
	pixelAt,
	pixelProbabilityFn,
	radecToNest,
	type SkyMap
} from '../sky/index.ts';

export type WeightSource = 'weight' | 'b' | 'k' | 'mass' | 'none';

/** A galaxy catalogue in columns (row k is galaxy k). */
export interface GalaxyCatalog {
	size: number;
	id: string[];
	raDeg: Float64Array;
	decDeg: Float64Array;
	distanceMpc: Float64Array;
	/** 1σ distance uncertainty, Mpc (0 = exact). */
	distanceErrMpc: Float64Array;
	/** Luminosity proxy used in the score (1 when the catalogue has none). */
	weight: Float64Array;
	/** B-band luminosity in 10^10 L_B,⊙ (NaN where unknown), or null when the catalogue has no B magnitudes. */
	luminosityB10: Float64Array | null;
	/** Where `weight` came from. */
	weightSource: WeightSource;
}

/** Order of the catalogue index (nside 256). */
export const INDEX_ORDER = 8;

/**
 * B-band luminosity density of the local Universe, in 10^10 L_B,⊙ Mpc⁻³:
 * (1.98 ± 0.16) × 10⁻² (Kopparapu et al. 2008, ApJ 675, 1459, for H0 = 70; from memory).
 */
export const B_LUMINOSITY_DENSITY_L10_PER_MPC3 = 1.98e-2;

export interface CatalogIndex {
	order: number;
	size: number;
	/** Galaxies in index pixel p are sorted positions offsets[p] … offsets[p+1]−1. */
	offsets: Uint32Array;
	/** Catalogue row of each sorted position. */
	row: Uint32Array;
	raDeg: Float64Array;
	decDeg: Float64Array;
	distanceMpc: Float64Array;
	distanceErrMpc: Float64Array;
	weight: Float64Array;
	luminosityB10: Float64Array | null;
	catalog: GalaxyCatalog;
}

/** Bucket a catalogue by nested pixel at `order` (counting sort; O(N)). */
export function buildCatalogIndex(catalog: GalaxyCatalog, order = INDEX_ORDER): CatalogIndex {
	const n = catalog.size;
	const np = npix(order);
	const pix = new Uint32Array(n);
	const counts = new Uint32Array(np + 1);
	for (let k = 0; k < n; k++) {
		const p = radecToNest(order, catalog.raDeg[k], catalog.decDeg[k]);
		pix[k] = p;
		counts[p + 1]++;
	}
	for (let p = 0; p < np; p++) counts[p + 1] += counts[p];
	const offsets = counts.slice();
	const row = new Uint32Array(n);
	const cursor = counts;
	for (let k = 0; k < n; k++) row[cursor[pix[k]]++] = k;
	const take = (src: Float64Array) => {
		const out = new Float64Array(n);
		for (let j = 0; j < n; j++) out[j] = src[row[j]];
		return out;
	};
	return {
		order,
		size: n,
		offsets,
		row,
		raDeg: take(catalog.raDeg),
		decDeg: take(catalog.decDeg),
		distanceMpc: take(catalog.distanceMpc),
		distanceErrMpc: take(catalog.distanceErrMpc),
		weight: take(catalog.weight),
		luminosityB10: catalog.luminosityB10 ? take(catalog.luminosityB10) : null,
		catalog
	};
}

const INV_SQRT_2PI = 1 / Math.sqrt(2 * Math.PI);

/**
 * E[N(r; μ, σ)] for r ~ N(d, σ_g) truncated to r > 0, per Mpc (closed form in the module comment).
 */
export function expectedDistanceKernel(dMpc: number, errMpc: number, mu: number, sigma: number): number {
	if (!(errMpc > 0)) {
		const x = (dMpc - mu) / sigma;
		return (Math.exp(-0.5 * x * x) * INV_SQRT_2PI) / sigma;
	}
	const s2 = sigma * sigma + errMpc * errMpc;
	const s = Math.sqrt(s2);
	const x = (dMpc - mu) / s;
	const m = (mu * errMpc * errMpc + dMpc * sigma * sigma) / s2;
	const tau = (sigma * errMpc) / s;
	return ((Math.exp(-0.5 * x * x) * INV_SQRT_2PI) / s) * (normalCdf(m / tau) / normalCdf(dMpc / errMpc));
}

export interface RankOptions {
	/** Credible level of the region searched (default 0.99). */
	level?: number;
	/** Keep only the best N in `galaxies` (probabilities are still normalised over all candidates). */
	limit?: number;
}

/**
 * A galaxy whose catalogued distance has a two-sided tail probability below this under the map's
 * distance posterior in its direction lies far outside the distance range the map allows: flagged
 * on the targets page. 0.01 is a conventional significance level (common practice), not a fitted value.
 */
export const DISTANCE_OUTLIER_P = 0.01;

export interface RankedGalaxy {
	rank: number;
	id: string;
	/** Catalogue row. */
	row: number;
	ra: number;
	dec: number;
	distance: number;
	/** ρ · DISTNORM · G · w: per Mpc³ × weight units (per sr × weight for a 2-D map). */
	score: number;
	/** score / Σ scores over all candidates. */
	probability: number;
	cumulative: number;
	/**
	 * Two-sided tail probability of the catalogued distance under the map's conditional distance
	 * posterior in the galaxy's pixel (`distancePValue`); null for a 2-D map.
	 */
	distancePValue: number | null;
}

export interface Completeness {
	/** Distance range used, Mpc: sky-marginal mean ± 2 std (clipped at 0). */
	distanceRangeMpc: [number, number];
	volumeMpc3: number;
	/** Σ B luminosity of candidates inside the distance range, 10^10 L_B,⊙. */
	catalogLuminosityB10: number;
	/** Luminosity density × volume, 10^10 L_B,⊙. */
	expectedLuminosityB10: number;
	/** catalogue / expected (above 1 is possible: clustering, or a synthetic catalogue's density). */
	ratio: number;
}

export interface RankResult {
	mode: '3d' | '2d';
	level: number;
	regionAreaDeg2: number;
	/** Galaxies inside the region with a positive score. */
	candidates: number;
	/** Galaxies inside the region whose pixel carries no distance information (not scored). */
	withoutDistance: number;
	/** Galaxies inside the region with zero score (zero weight or vanishing density). */
	zeroScore: number;
	/** Galaxies read from the index to answer the query (a cost measure). */
	examined: number;
	totalScore: number;
	galaxies: RankedGalaxy[];
	completeness: Completeness | null;
}

/**
 * Rank the galaxies of an indexed catalogue inside the credible region at `level` of `map`.
 * Candidates are galaxies whose map pixel has density ≥ the region's threshold (the same pixel set
 * as `credibleRegions`). Ordered by score, ties by catalogue row.
 */
export function rankGalaxies(map: SkyMap, index: CatalogIndex, options: RankOptions = {}): RankResult {
	const level = options.level ?? 0.99;
	const [region] = credibleRegions(map, [level]);
	const t = region.densityThresholdPerSr;
	const dens = map.probDensity;
	const mu = map.distMu;
	const sg = map.distSigma;
	const nrm = map.distNorm;
	const threeD = mu !== null && sg !== null && nrm !== null;
	const io = index.order;
	const { offsets, raDeg, decDeg, distanceMpc, distanceErrMpc, weight } = index;

	const candPos: number[] = [];
	const candScore: number[] = [];
	const candPix: number[] = [];
	let withoutDistance = 0;
	let zeroScore = 0;
	let examined = 0;

	const score = (j: number, i: number) => {
		const rho = dens[i];
		let s: number;
		if (threeD) {
			const m = mu![i];
			const sd = sg![i];
			const no = nrm![i];
			if (!hasDistance(m, sd, no)) {
				withoutDistance++;
				return;
			}
			s = rho * no * expectedDistanceKernel(distanceMpc[j], distanceErrMpc[j], m, sd) * weight[j];
		} else s = rho * weight[j];
		if (s > 0) {
			candPos.push(j);
			candScore.push(s);
			candPix.push(i);
		} else zeroScore++;
	};

	// Index pixels under map pixels finer than the index, to visit once each.
	const finer = new Uint8Array(npix(io));
	let anyFiner = false;
	const px = { order: 0, ipix: 0 };
	for (let i = 0; i < map.size; i++) {
		if (!(dens[i] >= t)) continue;
		nestedPixel(map, i, px);
		const o = px.order;
		const p = px.ipix;
		if (o <= io) {
			// Nested children of (o, p) at the index order are one contiguous range.
			const f = 4 ** (io - o);
			const a = offsets[p * f];
			const b = offsets[(p + 1) * f];
			examined += b - a;
			for (let j = a; j < b; j++) score(j, i);
		} else {
			finer[Math.floor(p / 4 ** (o - io))] = 1;
			anyFiner = true;
		}
	}
	if (anyFiner) {
		for (let q = 0; q < finer.length; q++) {
			if (!finer[q]) continue;
			const a = offsets[q];
			const b = offsets[q + 1];
			examined += b - a;
			for (let j = a; j < b; j++) {
				const i = pixelAt(map, raDeg[j], decDeg[j]);
				// The parent may also hold finer map pixels outside the region.
				if (i < 0 || !(dens[i] >= t)) continue;
				score(j, i);
			}
		}
	}

	const n = candPos.length;
	const rows = index.row;
	const order = new Uint32Array(n);
	for (let k = 0; k < n; k++) order[k] = k;
	order.sort((a, b) => candScore[b] - candScore[a] || rows[candPos[a]] - rows[candPos[b]]);
	let total = 0;
	for (let k = 0; k < n; k++) total += candScore[k];
	const keep = Math.min(n, options.limit ?? n);
	const galaxies: RankedGalaxy[] = new Array(keep);
	let cum = 0;
	for (let k = 0; k < keep; k++) {
		const c = order[k];
		const j = candPos[c];
		const p = candScore[c] / total;
		cum += p;
		galaxies[k] = {
			rank: k + 1,
			id: index.catalog.id[rows[j]],
			row: rows[j],
			ra: raDeg[j],
			dec: decDeg[j],
			distance: distanceMpc[j],
			score: candScore[c],
			probability: p,
			cumulative: Math.min(1, cum),
			distancePValue: threeD ? distancePValue(distanceMpc[j], mu![candPix[c]], sg![candPix[c]]) : null
		};
	}

	return {
		mode: threeD ? '3d' : '2d',
		level,
		regionAreaDeg2: region.areaDeg2,
		candidates: n,
		withoutDistance,
		zeroScore,
		examined,
		totalScore: total,
		galaxies,
		completeness: threeD ? completeness(map, index, region.areaSr, candPos) : null
	};
}

/**
 * Completeness hint: catalogued B luminosity of the candidates within the sky-marginal distance
 * mean ± 2 std, against the luminosity density (Kopparapu et al. 2008, from memory) times the
 * region's volume Ω (r₂³ − r₁³)/3. Null without B luminosities or distance information.
 */
function completeness(map: SkyMap, index: CatalogIndex, areaSr: number, candPos: number[]): Completeness | null {
	const lum = index.luminosityB10;
	if (!lum || !map.distMu || !map.distSigma) return null;
	const m = marginalMoments(pixelProbabilityFn(map), map.size, map.distMu, map.distSigma, map.distNorm);
	if (!m) return null;
	const r1 = Math.max(0, m.meanMpc - 2 * m.stdMpc);
	const r2 = m.meanMpc + 2 * m.stdMpc;
	const volume = (areaSr * (r2 ** 3 - r1 ** 3)) / 3;
	let have = 0;
	for (const j of candPos) {
		const d = index.distanceMpc[j];
		if (d >= r1 && d <= r2 && Number.isFinite(lum[j])) have += lum[j];
	}
	const expected = B_LUMINOSITY_DENSITY_L10_PER_MPC3 * volume;
	return { distanceRangeMpc: [r1, r2], volumeMpc3: volume, catalogLuminosityB10: have, expectedLuminosityB10: expected, ratio: have / expected };
}
