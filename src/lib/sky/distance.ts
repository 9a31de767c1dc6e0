/**
 * Distance posterior of a 3-D sky map, using the ansatz of Singer et al. 2016
 * (ApJL 829, L15, eq. 1; details in the supplement, ApJS 226, 10, §3):
 *
 *   p(r | n) = DISTNORM(n) · r² · N(r; DISTMU(n), DISTSIGMA(n)),   r > 0,
 *
 * with N the normal density and DISTNORM = 1 / ∫₀^∞ r² N(r; μ, σ) dr.
 * The moments follow from the truncated-normal moments
 *   M_k(μ, σ) = ∫₀^∞ r^k N(r; μ, σ) dr,  M_k = μ M_{k-1} + (k−1) σ² M_{k-2} (k ≥ 2),
 *   M_0 = Φ(x), M_1 = μ Φ(x) + σ φ(x), x = μ/σ,
 * so that E[r] = M_3/M_2 and E[r²] = M_4/M_2 (supplement §3, eqs. for the conditional moments).
 *
 * Pixels with non-finite DISTMU or DISTSIGMA, DISTSIGMA ≤ 0, or DISTNORM ≤ 0 carry no distance
 * information (writers set DISTMU = ∞, DISTNORM = 0 there). They are excluded from the sky-marginal
 * distance moments, which are then normalised over the probability of the pixels that remain; the
 * conditional moments in such a direction are null.
 */

const SQRT_2PI = Math.sqrt(2 * Math.PI);

/** Standard normal density φ(x). */
export function normalPdf(x: number): number {
	return Math.exp(-0.5 * x * x) / SQRT_2PI;
}

/**
 * Mills ratio R(t) = Q(t)/φ(t) = (1 − Φ(t))/φ(t) for t ≥ 3, by the Laplace continued fraction
 * R(t) = 1/(t + 1/(t + 2/(t + 3/(t + …)))) evaluated with the modified Lentz method
 * (Press et al., Numerical Recipes 3rd ed., §5.2).
 */
function millsRatio(t: number): number {
	const tiny = 1e-300;
	let f = t;
	let C = t;
	let D = 0;
	for (let k = 1; k < 500; k++) {
		D = t + k * D;
		D = D === 0 ? tiny : D;
		C = t + k / C;
		C = C === 0 ? tiny : C;
		D = 1 / D;
		const delta = C * D;
		f *= delta;
		if (Math.abs(delta - 1) < 1e-16) break;
	}
	return 1 / f;
}

/**
 * Standard normal CDF Φ(x). |x| < 3: Φ = ½ + φ(x) Σ x^{2n+1}/(2n+1)!! (Marsaglia 2004, J. Stat.
 * Softw. 11(4)); otherwise the continued fraction above. Relative error ≲ 1e-14.
 */
export function normalCdf(x: number): number {
	if (x <= -3) return normalPdf(x) * millsRatio(-x);
	if (x >= 3) return 1 - normalPdf(x) * millsRatio(x);
	let term = x;
	let sum = x;
	const x2 = x * x;
	for (let n = 1; n < 200; n++) {
		term *= x2 / (2 * n + 1);
		sum += term;
		if (Math.abs(term) < 1e-17 * Math.abs(sum)) break;
	}
	return 0.5 + normalPdf(x) * sum;
}

interface ScaledMoments {
	/** M_2, M_3, M_4 at σ = 1, all multiplied by a common factor `scale` (so ratios are exact). */
	m2: number;
	m3: number;
	m4: number;
	/** The common factor: 1, or φ(x) when x ≤ −3 (then m_k hold M_k/φ(x) to avoid underflow). */
	scale: number;
}

function scaledMoments(x: number): ScaledMoments {
	const x2 = x * x;
	let P: number;
	let f: number;
	let scale = 1;
	if (x <= -3) {
		P = millsRatio(-x);
		f = 1;
		scale = normalPdf(x);
	} else {
		P = normalCdf(x);
		f = normalPdf(x);
	}
	return {
		m2: (x2 + 1) * P + x * f,
		m3: (x2 * x + 3 * x) * P + (x2 + 2) * f,
		m4: (x2 * x2 + 6 * x2 + 3) * P + (x2 * x + 5 * x) * f,
		scale
	};
}

export interface DistanceMoments {
	meanMpc: number;
	stdMpc: number;
}

/** Whether the ansatz parameters of a pixel carry distance information. */
export function hasDistance(mu: number, sigma: number, norm?: number): boolean {
	return Number.isFinite(mu) && Number.isFinite(sigma) && sigma > 0 && (norm === undefined || (Number.isFinite(norm) && norm > 0));
}

/**
 * Conditional mean and standard deviation of r under p(r|n) ∝ r² N(r; μ, σ), r > 0
 * (Singer et al. 2016 supplement, ApJS 226, 10, §3): E[r] = M_3/M_2, E[r²] = M_4/M_2.
 * Returns null when the parameters carry no distance information.
 */
export function conditionalMoments(mu: number, sigma: number): DistanceMoments | null {
	if (!hasDistance(mu, sigma)) return null;
	const m = scaledMoments(mu / sigma);
	const mean = m.m3 / m.m2;
	const second = m.m4 / m.m2;
	return { meanMpc: sigma * mean, stdMpc: sigma * Math.sqrt(Math.max(0, second - mean * mean)) };
}

/** DISTNORM = 1/∫₀^∞ r² N(r; μ, σ) dr = 1/(σ² M_2(x)) in Mpc⁻² (Singer et al. 2016, eq. 1). */
export function distanceNorm(mu: number, sigma: number): number {
	const m = scaledMoments(mu / sigma);
	return 1 / (sigma * sigma * m.m2 * m.scale);
}

/** p(r|n) = DISTNORM · r² · N(r; μ, σ) for r > 0, per Mpc (Singer et al. 2016, eq. 1). */
export function conditionalPdf(rMpc: number, mu: number, sigma: number, norm: number): number {
	if (!(rMpc > 0) || !hasDistance(mu, sigma, norm)) return 0;
	return (norm * rMpc * rMpc * normalPdf((rMpc - mu) / sigma)) / sigma;
}

/**
 * ∫ r² N(r; μ, σ) dr over [0, R] (`lower`) and [R, ∞) (`upper`), both divided by σ². With
 * t = (r − μ)/σ, a = −μ/σ, b = (R − μ)/σ and ∫ t φ = −φ, ∫ t² φ = Φ − t φ:
 *   lower = x² [Φ]ₐᵇ − 2x [φ]ₐᵇ + [Φ]ₐᵇ − [tφ]ₐᵇ,   x = μ/σ,
 *   upper = x² Q(b) + 2x φ(b) + Q(b) + b φ(b),       Q(b) = 1 − Φ(b) = Φ(−b).
 * Each tail is summed on its own (not as 1 − the other), so a far tail keeps its digits.
 */
function ansatzTails(rMpc: number, mu: number, sigma: number): { lower: number; upper: number } {
	const x = mu / sigma;
	const a = -x;
	const b = (rMpc - mu) / sigma;
	// For μ < 0 both Φ(a) and Φ(b) are near 1: difference the upper tails instead.
	const dP = a > 0 ? normalCdf(-a) - normalCdf(-b) : normalCdf(b) - normalCdf(a);
	const dp = normalPdf(b) - normalPdf(a);
	const dtp = b * normalPdf(b) - a * normalPdf(a);
	const qb = normalCdf(-b);
	return {
		lower: Math.max(0, x * x * dP - 2 * x * dp + dP - dtp),
		upper: Math.max(0, x * x * qb + 2 * x * normalPdf(b) + qb + b * normalPdf(b))
	};
}

/**
 * Conditional distance CDF P(r ≤ R | n) under p(r|n) = DISTNORM r² N(r; μ, σ), r > 0
 * (Singer et al. 2016, ApJL 829 L15, eq. 1), in closed form (see `ansatzTails`).
 * Null when the parameters carry no distance information.
 */
export function conditionalCdf(rMpc: number, mu: number, sigma: number): number | null {
	const { cdf } = distanceTails(rMpc, mu, sigma);
	return Number.isNaN(cdf) ? null : cdf;
}

/**
 * How consistent a distance is with the conditional distance posterior in its direction: the
 * two-sided tail probability p = 2 · min(P(r ≤ R), P(r ≥ R)) under the ansatz of Singer et al. 2016,
 * each tail computed directly. 1 at the median, → 0 far outside. Null without distance information.
 */
export function distancePValue(rMpc: number, mu: number, sigma: number): number | null {
	if (!Number.isFinite(rMpc)) return null;
	const { cdf, sf } = distanceTails(rMpc, mu, sigma);
	return Number.isNaN(cdf) ? null : Math.min(1, 2 * Math.min(cdf, sf));
}

/**
 * dP/dV at a direction and distance, per Mpc³: ρ(n) · DISTNORM · N(r; μ, σ), with ρ the
 * probability density per steradian (Singer et al. 2016, ApJL 829 L15, eq. 2 context: dV = r² dr dΩ).
 */
export function dPdV(probDensityPerSr: number, rMpc: number, mu: number, sigma: number, norm: number): number {
	if (!(rMpc > 0) || !hasDistance(mu, sigma, norm)) return 0;
	return (probDensityPerSr * norm * normalPdf((rMpc - mu) / sigma)) / sigma;
}

/**
 * Sky-marginal distance mean and standard deviation: the probability-weighted mixture of the
 * per-pixel conditional posteriors, E[r] = Σ pᵢ E[r|i] / Σ pᵢ and E[r²] = Σ pᵢ (σᵢ² + mᵢ²) / Σ pᵢ,
 * over the pixels with distance information (Singer et al. 2016 supplement §3).
 * `prob` is the probability of each pixel (density × area). Returns null when no pixel qualifies.
 */
export function marginalMoments(
	prob: (i: number) => number,
	size: number,
	mu: Float64Array,
	sigma: Float64Array,
	norm: Float64Array | null
): (DistanceMoments & { probabilityWithDistance: number }) | null {
	let w = 0;
	let s1 = 0;
	let s2 = 0;
	for (let i = 0; i < size; i++) {
		const p = prob(i);
		if (!(p > 0)) continue;
		const m = mu[i];
		const s = sigma[i];
		if (!hasDistance(m, s, norm ? norm[i] : undefined)) continue;
		const c = conditionalMoments(m, s)!;
		w += p;
		s1 += p * c.meanMpc;
		s2 += p * (c.stdMpc * c.stdMpc + c.meanMpc * c.meanMpc);
	}
	if (!(w > 0)) return null;
	const mean = s1 / w;
	return { meanMpc: mean, stdMpc: Math.sqrt(Math.max(0, s2 / w - mean * mean)), probabilityWithDistance: w };
}

/** Coefficient of variation std/mean of the ansatz at σ = 1, as a function of x = μ/σ. */
function variation(x: number): number {
	const m = scaledMoments(x);
	const mean = m.m3 / m.m2;
	return Math.sqrt(Math.max(0, m.m4 / m.m2 - mean * mean)) / mean;
}

/** As x → −∞ the ansatz tends to a Gamma(3) law (r² e^{−r/λ}), whose std/mean is 1/√3. */
export const MAX_DISTANCE_VARIATION = 1 / Math.sqrt(3);

/**
 * Inverse of `conditionalMoments`: ansatz parameters (μ, σ, DISTNORM) whose conditional mean and
 * standard deviation are the given ones. Solves std/mean = v(x) for x = μ/σ by bisection
 * (v decreases monotonically from 1/√3 at x → −∞ to 0 at x → ∞), then σ = mean / (M_3/M_2)(x).
 * Throws when std/mean ≥ 1/√3 (not reachable by the ansatz).
 */
export function parametersFromMoments(meanMpc: number, stdMpc: number): { mu: number; sigma: number; norm: number } {
	if (!(meanMpc > 0) || !(stdMpc > 0)) throw new RangeError('distance mean and std must be positive');
	const target = stdMpc / meanMpc;
	// Lower limit x = −30 keeps the series stable; v(−30) is within 0.5% of 1/√3.
	let lo = -30;
	let hi = 1e7;
	if (target >= variation(lo)) {
		throw new RangeError(`std/mean = ${target.toPrecision(4)} is too large for the distance ansatz (must be < ${variation(lo).toPrecision(4)})`);
	}
	if (target <= variation(hi)) throw new RangeError(`std/mean = ${target} is too small for the distance ansatz`);
	for (let k = 0; k < 200 && hi - lo > 1e-13 * Math.max(1, Math.abs(lo)); k++) {
		// Bisect in x where |x| is small, geometrically where large.
		const mid = lo > 1 && hi > 1 ? Math.sqrt(lo * hi) : 0.5 * (lo + hi);
		if (variation(mid) > target) lo = mid;
		else hi = mid;
	}
	const x = 0.5 * (lo + hi);
	const m = scaledMoments(x);
	const sigma = meanMpc / (m.m3 / m.m2);
	const mu = x * sigma;
	return { mu, sigma, norm: distanceNorm(mu, sigma) };
}

/**
 * Both tails of the distance ansatz p(r|n) ∝ r² N(r; μ, σ), r > 0 (Singer et al. 2016) at R:
 * `cdf` = F(R) = ∫₀^R p dr and `sf` = 1 − F(R) = ∫_R^∞ p dr, each summed on its own in closed form
 * (`ansatzTails`), so a far tail keeps its relative precision. NaN when the parameters carry no
 * distance information or the normalisation underflows.
 */
export function distanceTails(rMpc: number, mu: number, sigma: number): { cdf: number; sf: number } {
	if (!hasDistance(mu, sigma) || Number.isNaN(rMpc)) return { cdf: NaN, sf: NaN };
	if (!(rMpc > 0)) return { cdf: 0, sf: 1 };
	if (rMpc === Infinity) return { cdf: 1, sf: 0 };
	const { lower, upper } = ansatzTails(rMpc, mu, sigma);
	const total = lower + upper;
	if (!(total > 0)) return { cdf: NaN, sf: NaN };
	return { cdf: Math.min(1, lower / total), sf: Math.min(1, upper / total) };
}
