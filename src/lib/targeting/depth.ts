/**
 * Depth check: can a telescope reaching limiting magnitude m_lim see a kilonova at the event's
 * distance?
 *
 *   m = M + 5 log10(d / 10 pc) + A = M + 5 log10(d_Mpc) + 25 + A   (distance modulus; standard)
 *
 * M: the kilonova's peak absolute magnitude. Default −16.0 in r/i about one day after the merger,
 * roughly the brightness of the kilonova seen in August 2017 (M_r ≈ −15.5 to −16 near 1 day;
 * e.g. Arcavi et al. 2017, Nature 551, 64; from memory, not verified here). A: extinction along the
 * line of sight in the same band (default 0). No K-correction (negligible at these distances).
 *
 * Distances evaluated: the sky-marginal mean and mean ± std, and the 90% upper distance of the
 * distance ansatz with that mean and std (Singer et al. 2016: p(r) ∝ r² N(r; μ, σ); its CDF in closed
 * form in sky/distance.ts). Verdict:
 *   'deep enough'  m_lim ≥ m at the 90% upper distance;
 *   'marginal'     m at the mean ≤ m_lim < m at the 90% upper distance;
 *   'too shallow'  m_lim < m at the mean.
 */
import { conditionalCdf, parametersFromMoments } from '../sky/index.ts';

/** Peak absolute magnitude of a kilonova in r/i near 1 day (from memory; see module comment). */
export const KILONOVA_PEAK_ABS_MAG = -16.0;

/** Distance modulus 5 log10(d / 10 pc) for d in Mpc. */
export function distanceModulus(distanceMpc: number): number {
	if (!(distanceMpc > 0)) throw new RangeError(`distance must be positive, got ${distanceMpc}`);
	return 5 * Math.log10(distanceMpc) + 25;
}

/** Apparent magnitude m = M + 5 log10(d/10 pc) + A. */
export function apparentMagnitude(absoluteMag: number, distanceMpc: number, extinctionMag = 0): number {
	return absoluteMag + distanceModulus(distanceMpc) + extinctionMag;
}

/** Distance below which a fraction q of the ansatz with this mean and std lies (bisection on the CDF). */
export function distanceQuantile(meanMpc: number, stdMpc: number, q: number): number {
	if (!(q > 0 && q < 1)) throw new RangeError(`quantile ${q} is outside (0, 1)`);
	const { mu, sigma } = parametersFromMoments(meanMpc, stdMpc);
	let lo = 0;
	let hi = meanMpc + 50 * stdMpc;
	for (let k = 0; k < 200 && hi - lo > 1e-12 * hi; k++) {
		const mid = 0.5 * (lo + hi);
		if (conditionalCdf(mid, mu, sigma)! < q) lo = mid;
		else hi = mid;
	}
	return 0.5 * (lo + hi);
}

export type DepthVerdict = 'deep enough' | 'marginal' | 'too shallow';

export interface DepthInput {
	distanceMeanMpc: number;
	distanceStdMpc: number;
	limitingMag: number;
	/** Default KILONOVA_PEAK_ABS_MAG. */
	absoluteMag?: number;
	extinctionMag?: number;
}

export interface DepthPoint {
	label: 'mean - std' | 'mean' | 'mean + std' | '90% upper';
	distanceMpc: number;
	apparentMag: number;
}

export interface DepthCheck {
	absoluteMag: number;
	extinctionMag: number;
	limitingMag: number;
	points: DepthPoint[];
	verdict: DepthVerdict;
	/** m_lim − m at the 90% upper distance (positive: margin to spare). */
	marginMag: number;
	/** One sentence with the numbers. */
	summary: string;
}

/** Compare a limiting magnitude with a kilonova's brightness across the event's distance range. */
export function depthCheck(input: DepthInput): DepthCheck {
	const { distanceMeanMpc: mean, distanceStdMpc: std, limitingMag } = input;
	if (!(mean > 0) || !(std >= 0)) throw new RangeError('distance mean must be positive and std non-negative');
	if (!Number.isFinite(limitingMag)) throw new RangeError('limiting magnitude must be a number');
	const M = input.absoluteMag ?? KILONOVA_PEAK_ABS_MAG;
	const A = input.extinctionMag ?? 0;
	// A std too wide for the ansatz (≥ mean/√3) falls back to a normal 90% point, mean + 1.2816 std.
	let p90: number;
	try {
		p90 = std > 0 ? distanceQuantile(mean, std, 0.9) : mean;
	} catch {
		p90 = mean + 1.2815515655446004 * std;
	}
	const at = (label: DepthPoint['label'], d: number): DepthPoint => ({ label, distanceMpc: d, apparentMag: apparentMagnitude(M, d, A) });
	const points = [
		...(mean - std > 0 ? [at('mean - std', mean - std)] : []),
		at('mean', mean),
		at('mean + std', mean + std),
		at('90% upper', p90)
	];
	const mMean = apparentMagnitude(M, mean, A);
	const m90 = apparentMagnitude(M, p90, A);
	const verdict: DepthVerdict = limitingMag >= m90 ? 'deep enough' : limitingMag >= mMean ? 'marginal' : 'too shallow';
	const summary =
		`A kilonova of M = ${M.toFixed(1)}${A ? ` with A = ${A.toFixed(2)}` : ''} would be m = ${mMean.toFixed(2)} at ${mean.toFixed(0)} Mpc ` +
		`and m = ${m90.toFixed(2)} at the 90% upper distance ${p90.toFixed(0)} Mpc; limiting magnitude ${limitingMag.toFixed(2)}: ${verdict}.`;
	return { absoluteMag: M, extinctionMag: A, limitingMag, points, verdict, marginMag: limitingMag - m90, summary };
}
