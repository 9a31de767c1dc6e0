import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
	conditionalCdf,
	conditionalMoments,
	distancePValue,
	conditionalPdf,
	distanceNorm,
	dPdV,
	normalCdf,
	parametersFromMoments
} from './distance.ts';

/** Composite Simpson rule on [0, hi] with n (even) intervals. */
function simpson(f: (r: number) => number, hi: number, n = 200000): number {
	const h = hi / n;
	let s = f(0) + f(hi);
	for (let k = 1; k < n; k++) s += (k % 2 ? 4 : 2) * f(k * h);
	return (s * h) / 3;
}

const cases: [number, number][] = [
	[150, 40], // well measured (x = 3.75)
	[100, 80], // x = 1.25
	[30, 90], // x = 1/3: strongly truncated at r = 0
	[-50, 60], // negative μ: allowed by the ansatz
	[-200, 50], // x = −4: Mills-ratio branch
	[800, 20] // x = 40
];

describe('Singer et al. 2016 distance ansatz', () => {
	it('Φ matches tabulated values (Abramowitz & Stegun Table 26.1, from memory to the digits shown)', () => {
		expect.hasAssertions();
		expect(normalCdf(0)).toBe(0.5);
		expect(normalCdf(1)).toBeCloseTo(0.841344746068543, 14);
		expect(normalCdf(-1.96)).toBeCloseTo(0.024997895148220, 14);
		expect(normalCdf(3)).toBeCloseTo(0.998650101968370, 14);
		expect(normalCdf(-5) / 2.866515718791939e-7).toBeCloseTo(1, 12);
		// Φ(x) + Φ(−x) = 1 across the branch switch at |x| = 3.
		for (const x of [0.3, 2.99, 3, 3.01, 6]) expect(normalCdf(x) + normalCdf(-x)).toBeCloseTo(1, 15);
	});

	it.each(cases)('μ=%d σ=%d: closed-form norm, mean and std equal numerical integration to 0.1 percent (tested at 1e-8)', (mu, sigma) => {
		expect.hasAssertions();
		const hi = Math.max(mu, 0) + 40 * sigma;
		const gauss = (r: number) => Math.exp(-0.5 * ((r - mu) / sigma) ** 2) / (sigma * Math.sqrt(2 * Math.PI));
		const z = simpson((r) => r * r * gauss(r), hi);
		const norm = distanceNorm(mu, sigma);
		expect(Math.abs(norm * z - 1)).toBeLessThan(1e-8);
		const m1 = simpson((r) => r * conditionalPdf(r, mu, sigma, norm), hi);
		const m2 = simpson((r) => r * r * conditionalPdf(r, mu, sigma, norm), hi);
		const std = Math.sqrt(m2 - m1 * m1);
		const c = conditionalMoments(mu, sigma)!;
		expect(Math.abs(c.meanMpc / m1 - 1)).toBeLessThan(1e-8);
		expect(Math.abs(c.stdMpc / std - 1)).toBeLessThan(1e-8);
	});

	it('dP/dV integrates back to the pixel probability: ∫ dP/dV r² dr = ρ', () => {
		expect.hasAssertions();
		const [mu, sigma, rho] = [120, 50, 3.5];
		const norm = distanceNorm(mu, sigma);
		const integral = simpson((r) => dPdV(rho, r, mu, sigma, norm) * r * r, mu + 40 * sigma);
		expect(integral / rho).toBeCloseTo(1, 9);
	});

	it('pixels without distance information give null / 0', () => {
		expect.hasAssertions();
		expect(conditionalMoments(Infinity, 1)).toBeNull();
		expect(conditionalMoments(100, 0)).toBeNull();
		expect(dPdV(1, 100, Infinity, 1, 0)).toBe(0);
	});

	it.each([
		[200, 60],
		[40, 20],
		[500, 5],
		[100, 55]
	])('inverse: mean %d std %d → (μ, σ, norm) → the same moments', (mean, std) => {
		expect.hasAssertions();
		const p = parametersFromMoments(mean, std);
		const c = conditionalMoments(p.mu, p.sigma)!;
		expect(c.meanMpc / mean).toBeCloseTo(1, 9);
		expect(c.stdMpc / std).toBeCloseTo(1, 9);
		expect(p.norm).toBeCloseTo(distanceNorm(p.mu, p.sigma), 15);
	});

	it('inverse refuses std/mean beyond the Gamma(3) limit 1/√3', () => {
		expect.hasAssertions();
		expect(() => parametersFromMoments(100, 60)).toThrow(/too large for the distance ansatz/);
	});
});

describe('conditional distance CDF and two-sided tail probability', () => {
	it.each(cases)('μ=%d σ=%d: the CDF equals direct numerical integration of r² N(r; μ, σ) to 1e-8', (mu, sigma) => {
		expect.hasAssertions();
		const hi = Math.max(mu, 0) + 40 * sigma;
		const f = (r: number) => r * r * Math.exp(-0.5 * ((r - mu) / sigma) ** 2);
		const total = simpson(f, hi);
		const { meanMpc, stdMpc } = conditionalMoments(mu, sigma)!;
		for (const R of [0.3 * meanMpc, meanMpc - stdMpc, meanMpc, meanMpc + stdMpc, meanMpc + 3 * stdMpc]) {
			const direct = simpson(f, R) / total;
			expect(Math.abs(conditionalCdf(R, mu, sigma)! - direct)).toBeLessThan(1e-8);
			expect(Math.abs(distancePValue(R, mu, sigma)! - 2 * Math.min(direct, 1 - direct))).toBeLessThan(2e-8);
		}
	});

	it('matches scipy.integrate.quad (tests/fixtures/sky/make_distance_cdf.py) to 1e-9, far tails to 1e-6 relative', () => {
		expect.hasAssertions();
		const ref = JSON.parse(readFileSync('tests/fixtures/sky/distance_cdf.json', 'utf8')) as { cases: { mu: number; sigma: number; r: number; cdf: number; sf: number; pValue: number }[] };
		expect(ref.cases.length).toBeGreaterThan(20);
		for (const c of ref.cases) {
			const cdf = conditionalCdf(c.r, c.mu, c.sigma)!;
			const p = distancePValue(c.r, c.mu, c.sigma)!;
			expect(Math.abs(cdf - c.cdf), JSON.stringify(c)).toBeLessThan(1e-9);
			expect(Math.abs(p / c.pValue - 1), JSON.stringify(c)).toBeLessThan(1e-6);
		}
	});

	it('is 1 at the median, small far out on either side, and null without distance information', () => {
		expect.hasAssertions();
		const { meanMpc, stdMpc } = { meanMpc: 118, stdMpc: 24 };
		const { mu, sigma } = parametersFromMoments(meanMpc, stdMpc);
		// Bisection for the median: p = 1 there.
		let lo = 0;
		let hi = 1000;
		for (let k = 0; k < 100; k++) {
			const mid = (lo + hi) / 2;
			if (conditionalCdf(mid, mu, sigma)! < 0.5) lo = mid;
			else hi = mid;
		}
		expect(distancePValue(lo, mu, sigma)).toBeCloseTo(1, 8);
		// 282 Mpc against 118 ± 24 Mpc: far outside.
		expect(distancePValue(282, mu, sigma)!).toBeLessThan(1e-4);
		expect(distancePValue(20, mu, sigma)!).toBeLessThan(1e-4);
		expect(distancePValue(0, mu, sigma)).toBe(0);
		expect(conditionalCdf(Infinity, mu, sigma)).toBe(1);
		expect(distancePValue(100, Infinity, 10)).toBeNull();
		expect(conditionalCdf(100, 50, 0)).toBeNull();
	});
});

describe('conditionalCdf (closed-form tails): cumulative probability of the distance ansatz', () => {
	// Reference: direct numerical integration of r² N(r; μ, σ) on r > 0 (composite Simpson), each
	// case's upper end 12σ past the larger of μ and 0, where the remaining tail is below 1e-30.
	const integral = (mu: number, sigma: number, hi: number) =>
		simpson((r) => r * r * Math.exp(-0.5 * ((r - mu) / sigma) ** 2), hi, 20000);
	it('matches numerical integration of r² N(r; μ, σ) for well-measured, truncated and negative-μ cases', () => {
		expect.hasAssertions();
		for (const [mu, sigma] of cases) {
			const end = Math.max(mu, 0) + 12 * sigma;
			const total = integral(mu, sigma, end);
			for (const q of [0.05, 0.3, 0.5, 0.8, 1.2, 2]) {
				const r = Math.max(mu, sigma) * q;
				const expected = integral(mu, sigma, r) / total;
				expect(Math.abs(conditionalCdf(r, mu, sigma)! - expected), `μ=${mu} σ=${sigma} r=${r}`).toBeLessThan(1e-9);
			}
		}
	});
	it('keeps a far upper tail to relative precision instead of losing it to 1 − F', () => {
		expect.hasAssertions();
		const [mu, sigma] = [150, 20];
		const r = 300; // 7.5σ above μ: 1 − F ≈ 1e-12, which 1 − F computed as a difference would resolve to a few digits at best
		const f = (x: number) => x * x * Math.exp(-0.5 * ((x - mu) / sigma) ** 2);
		// The tail integrated on its own interval [r, r + 40σ] (Simpson, shifted), not as a difference.
		const tail = simpson((x) => f(r + x), 40 * sigma, 40000);
		const total = simpson(f, 40 * sigma + mu, 40000);
		const p = distancePValue(r, mu, sigma)!;
		expect(p / 2 / (tail / total)).toBeCloseTo(1, 7);
		expect(p).toBeGreaterThan(0);
	});
	it('is 0 at and below r = 0, 1 at infinity, increasing, and NaN without distance information', () => {
		expect.hasAssertions();
		expect(conditionalCdf(0, 100, 30)).toBe(0);
		expect(conditionalCdf(-5, 100, 30)).toBe(0);
		expect(conditionalCdf(Infinity, 100, 30)).toBe(1);
		let last = 0;
		for (let r = 1; r < 400; r += 7) {
			const f = conditionalCdf(r, 100, 30)!;
			expect(f).toBeGreaterThanOrEqual(last);
			last = f;
		}
		expect(conditionalCdf(100, Infinity, 30)).toBeNull();
		expect(conditionalCdf(100, 100, 0)).toBeNull();
	});
	it('gives a two-sided p-value of 1 at the median and 2·min(F, 1 − F) elsewhere', () => {
		expect.hasAssertions();
		const [mu, sigma] = [120, 35];
		let lo = 0;
		let hi = 1000;
		for (let k = 0; k < 100; k++) {
			const mid = (lo + hi) / 2;
			if (conditionalCdf(mid, mu, sigma)! < 0.5) lo = mid;
			else hi = mid;
		}
		expect(distancePValue(lo, mu, sigma)).toBeCloseTo(1, 9);
		const f = conditionalCdf(60, mu, sigma)!;
		expect(distancePValue(60, mu, sigma)).toBeCloseTo(2 * Math.min(f, 1 - f), 15);
	});
});
