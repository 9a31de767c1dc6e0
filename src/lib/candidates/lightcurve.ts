/**
 * What a candidate's light curve says: how fast it fades in each filter, how its colour changes,
 * and how bright it is in absolute terms. Pure: takes photometry points, returns numbers.
 *
 * Rates are in magnitudes per day, positive = fading (magnitudes grow as a source dims). Only
 * detections enter the fits; upper limits are counted but not fitted (a limit only bounds the
 * magnitude from one side, and a straight-line fit cannot use that honestly).
 */
import type { PhotometryPoint } from './photometry.ts';

export const MS_PER_DAY = 86_400_000;

/**
 * Largest time between two detections in different filters that still makes one colour, days.
 * Half a day keeps a pair within one night at one site, and a kilonova's colour changes by a few
 * tenths of a magnitude per day at most in its first week, so a pair taken up to 0.5 d apart is off by
 * ≲ 0.1–0.2 mag, comparable to typical errors (common practice; the colour rate is from memory:
 * AT2017gfo reddened by roughly 1 mag in g − r over its first week).
 */
export const DEFAULT_COLOUR_WINDOW_DAYS = 0.5;

export interface LineFit {
	/** Slope, y units per x unit. */
	slope: number;
	/** Standard error of the slope from the unscaled covariance (the given errors taken as true). */
	slopeErr: number;
	/** Value of the line at the weighted mean x. */
	meanY: number;
	/** Weighted mean x. */
	meanX: number;
}

/**
 * Straight-line fit y = a + b·x by weighted least squares with weights w = 1/σ², and the slope's
 * standard error from the unscaled covariance matrix (AᵀWA)⁻¹, i.e. the σ are taken as the true
 * errors and not rescaled by the reduced χ² (Press et al., Numerical Recipes, 3rd ed., §15.2,
 * eqs. 15.2.4–15.2.9; numpy.polyfit(x, y, 1, w=1/σ, cov='unscaled') computes the same).
 * With x centred on the weighted mean x̄ = Σwx/Σw the normal equations decouple:
 *   b = Σw(x − x̄)(y − ȳ) / Σw(x − x̄)²,   σ_b² = 1 / Σw(x − x̄)²
 * (equal to Σw / (Σw·Σwx² − (Σwx)²), Numerical Recipes' S/Δ), which avoids the cancellation that
 * raw sums suffer when x is large (times in days since 1970).
 * Returns null with fewer than two points or when all x are equal (no slope is defined).
 */
export function weightedLineFit(x: ArrayLike<number>, y: ArrayLike<number>, sigma: ArrayLike<number>): LineFit | null {
	const n = x.length;
	if (y.length !== n || sigma.length !== n) throw new RangeError('x, y and sigma must have the same length');
	if (n < 2) return null;
	let sw = 0;
	let swx = 0;
	let swy = 0;
	let xMin = Infinity;
	let xMax = -Infinity;
	for (let i = 0; i < n; i++) {
		if (!(sigma[i] > 0) || !Number.isFinite(sigma[i])) throw new RangeError(`sigma[${i}] must be a positive number, got ${sigma[i]}`);
		const w = 1 / (sigma[i] * sigma[i]);
		sw += w;
		swx += w * x[i];
		swy += w * y[i];
		if (x[i] < xMin) xMin = x[i];
		if (x[i] > xMax) xMax = x[i];
	}
	if (xMax === xMin) return null;
	const meanX = swx / sw;
	const meanY = swy / sw;
	let sxx = 0;
	let sxy = 0;
	for (let i = 0; i < n; i++) {
		const w = 1 / (sigma[i] * sigma[i]);
		const dx = x[i] - meanX;
		sxx += w * dx * dx;
		sxy += w * dx * (y[i] - meanY);
	}
	if (!(sxx > 0)) return null;
	return { slope: sxy / sxx, slopeErr: Math.sqrt(1 / sxx), meanY, meanX };
}

/** Restrict to points with fromMs ≤ timeMs ≤ toMs (either bound optional). */
export interface TimeWindow {
	fromMs?: number;
	toMs?: number;
}

function inWindow(p: PhotometryPoint, w: TimeWindow | undefined): boolean {
	return (w?.fromMs === undefined || p.timeMs >= w.fromMs) && (w?.toMs === undefined || p.timeMs <= w.toMs);
}

function isDetection(p: PhotometryPoint): p is PhotometryPoint & { mag: number; magErr: number } {
	return p.mag !== null && p.magErr !== null;
}

export interface FilterSummary {
	detections: number;
	upperLimits: number;
	/** Fade rate, mag/day, positive = fading; null with fewer than two detections or all at one time. */
	rateMagPerDay: number | null;
	/** Standard error of the rate, mag/day (unscaled covariance); null when the rate is null. */
	rateErr: number | null;
	/** First and last detection, ISO 8601 UTC; null without detections. */
	first: string | null;
	last: string | null;
}

/**
 * Per filter: detections, upper limits, fade rate with its standard error (`weightedLineFit` on
 * magnitude against time in days, weights 1/mag_err²), first and last detection. With a window,
 * only points inside it are counted and fitted. Filters are keyed by their exact name ('r' and 'R'
 * are different bands).
 */
export function summariseLightCurve(points: readonly PhotometryPoint[], window?: TimeWindow): Record<string, FilterSummary> {
	const byFilter = new Map<string, PhotometryPoint[]>();
	for (const p of points) {
		if (!inWindow(p, window)) continue;
		const list = byFilter.get(p.filter);
		if (list) list.push(p);
		else byFilter.set(p.filter, [p]);
	}
	const out: Record<string, FilterSummary> = {};
	for (const filter of [...byFilter.keys()].sort()) {
		const list = byFilter.get(filter)!;
		const det = list.filter(isDetection).sort((a, b) => a.timeMs - b.timeMs);
		const t0 = det[0]?.timeMs ?? 0;
		const fit = weightedLineFit(
			det.map((p) => (p.timeMs - t0) / MS_PER_DAY),
			det.map((p) => p.mag),
			det.map((p) => p.magErr)
		);
		out[filter] = {
			detections: det.length,
			upperLimits: list.length - det.length,
			rateMagPerDay: fit?.slope ?? null,
			rateErr: fit?.slopeErr ?? null,
			first: det.length ? det[0].time : null,
			last: det.length ? det[det.length - 1].time : null
		};
	}
	return out;
}

export interface ColourPoint {
	/** Mean time of the two detections, ISO 8601 UTC, and in ms. */
	time: string;
	timeMs: number;
	/** blue − red, mag. */
	colourMag: number;
	/** √(σ_blue² + σ_red²), mag (independent errors). */
	colourErr: number;
	/** |t_blue − t_red|, days. */
	separationDays: number;
}

export interface ColourEvolution {
	blue: string;
	red: string;
	pairs: ColourPoint[];
	/** Change of blue − red per day (positive = getting redder); null with fewer than two pairs at different times. */
	rateMagPerDay: number | null;
	rateErr: number | null;
}

/**
 * Colour blue − red (e.g. g − r) from detections in the two filters taken within `windowDays` of
 * each other, and its change per day by `weightedLineFit` (weights 1/colourErr²).
 * Pairing: all candidate pairs within the window are taken closest first, each detection used at
 * most once, so a dense series in one filter does not reuse one point of the other.
 */
export function colourEvolution(
	points: readonly PhotometryPoint[],
	blue: string,
	red: string,
	options: { windowDays?: number } & TimeWindow = {}
): ColourEvolution {
	const windowDays = options.windowDays ?? DEFAULT_COLOUR_WINDOW_DAYS;
	if (!(windowDays >= 0)) throw new RangeError(`the colour window must be a non-negative number of days, got ${windowDays}`);
	const b = points.filter((p) => p.filter === blue && isDetection(p) && inWindow(p, options));
	const r = points.filter((p) => p.filter === red && isDetection(p) && inWindow(p, options));
	const candidates: [number, number, number][] = [];
	const limitMs = windowDays * MS_PER_DAY;
	b.forEach((pb, i) =>
		r.forEach((pr, j) => {
			const dt = Math.abs(pb.timeMs - pr.timeMs);
			if (dt <= limitMs) candidates.push([dt, i, j]);
		})
	);
	candidates.sort((x, y) => x[0] - y[0] || x[1] - y[1] || x[2] - y[2]);
	const usedB = new Set<number>();
	const usedR = new Set<number>();
	const pairs: ColourPoint[] = [];
	for (const [dt, i, j] of candidates) {
		if (usedB.has(i) || usedR.has(j)) continue;
		usedB.add(i);
		usedR.add(j);
		const pb = b[i];
		const pr = r[j];
		const timeMs = (pb.timeMs + pr.timeMs) / 2;
		pairs.push({
			time: new Date(Math.round(timeMs)).toISOString(),
			timeMs,
			colourMag: pb.mag! - pr.mag!,
			colourErr: Math.hypot(pb.magErr!, pr.magErr!),
			separationDays: dt / MS_PER_DAY
		});
	}
	pairs.sort((x, y) => x.timeMs - y.timeMs);
	const t0 = pairs[0]?.timeMs ?? 0;
	const fit = weightedLineFit(
		pairs.map((p) => (p.timeMs - t0) / MS_PER_DAY),
		pairs.map((p) => p.colourMag),
		pairs.map((p) => p.colourErr)
	);
	return { blue, red, pairs, rateMagPerDay: fit?.slope ?? null, rateErr: fit?.slopeErr ?? null };
}

/**
 * Distance modulus μ = 5·log10(d / 10 pc) = 5·log10(d_Mpc) + 25 (the definition of absolute
 * magnitude; e.g. Carroll & Ostlie, An Introduction to Modern Astrophysics, eq. 3.6 — from memory).
 */
export function distanceModulus(distanceMpc: number): number {
	if (!(distanceMpc > 0) || !Number.isFinite(distanceMpc)) throw new RangeError(`distance must be a positive number of Mpc, got ${distanceMpc}`);
	return 5 * Math.log10(distanceMpc) + 25;
}

/**
 * Absolute magnitude M = m − 5·log10(d / 10 pc). No K-correction (at the ≲ 300 Mpc of kilonova
 * searches, z ≲ 0.07, it is at most a few tenths of a magnitude — from memory — and depends on the
 * unknown spectrum)
 * and no extinction correction: the caller subtracts Galactic or host extinction first if it knows it.
 * The distance is used as a luminosity distance.
 */
export function absoluteMagnitude(apparentMag: number, distanceMpc: number): number {
	return apparentMag - distanceModulus(distanceMpc);
}

/**
 * Error of M from the magnitude error and a distance error, first-order propagation with
 * independent errors: σ_M² = σ_m² + (5 / ln 10 · σ_d / d)².
 */
export function absoluteMagnitudeErr(magErr: number, distanceMpc: number, distanceErrMpc = 0): number {
	return Math.hypot(magErr, (5 / Math.LN10) * (distanceErrMpc / distanceMpc));
}

/**
 * The brightest detection (smallest magnitude), optionally among some filters and inside a window.
 * It bounds the peak from below only: a source caught after its peak was brighter than this.
 */
export function brightestDetection(
	points: readonly PhotometryPoint[],
	options: { filters?: readonly string[] } & TimeWindow = {}
): PhotometryPoint | null {
	let best: PhotometryPoint | null = null;
	for (const p of points) {
		if (!isDetection(p) || !inWindow(p, options)) continue;
		if (options.filters && !options.filters.includes(p.filter)) continue;
		if (best === null || p.mag < best.mag!) best = p;
	}
	return best;
}
