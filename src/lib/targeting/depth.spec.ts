import { describe, expect, it } from 'vitest';
import { conditionalMoments, normalPdf, parametersFromMoments } from '../sky/index.ts';
import { conditionalCdf as ansatzCdf } from '../sky/index.ts';
import { apparentMagnitude, depthCheck, distanceModulus, distanceQuantile, KILONOVA_PEAK_ABS_MAG } from './depth.ts';

describe('distance modulus (standard definition m − M = 5 log10(d / 10 pc))', () => {
	it('worked examples: M = −16 at 40 Mpc is m ≈ 17.0, at 100 Mpc m = 19.0', () => {
		expect.hasAssertions();
		// 40 Mpc = 4e6 × 10 pc ⇒ 5 log10(4e6) = 5 × 6.60206 = 33.0103.
		expect(apparentMagnitude(-16, 40)).toBeCloseTo(-16 + 5 * (6 + Math.log10(4)), 12);
		expect(apparentMagnitude(-16, 40)).toBeCloseTo(17.01, 2);
		expect(apparentMagnitude(-16, 100)).toBeCloseTo(19.0, 12);
		// 10 pc = 1e-5 Mpc: modulus 0 by definition; extinction adds.
		expect(distanceModulus(1e-5)).toBeCloseTo(0, 12);
		expect(apparentMagnitude(-16, 100, 0.3)).toBeCloseTo(19.3, 12);
		expect(KILONOVA_PEAK_ABS_MAG).toBe(-16);
		expect(() => distanceModulus(0)).toThrow(RangeError);
	});
});

describe('distance quantile of the ansatz', () => {
	it('CDF matches Simpson integration of r² N(r; μ, σ) and the 90% point inverts it', () => {
		expect.hasAssertions();
		const { mu, sigma } = parametersFromMoments(150, 45);
		const n = 20000;
		const R = 200;
		const integrate = (hi: number) => {
			let acc = 0;
			for (let j = 0; j <= n; j++) {
				const r = (hi * j) / n;
				acc += r * r * normalPdf((r - mu) / sigma) * (j === 0 || j === n ? 1 : j % 2 ? 4 : 2);
			}
			return (acc * hi) / (3 * n);
		};
		expect(ansatzCdf(R, mu, sigma)).toBeCloseTo(integrate(R) / integrate(mu + 40 * sigma), 9);
		const q90 = distanceQuantile(150, 45, 0.9);
		expect(ansatzCdf(q90, mu, sigma)).toBeCloseTo(0.9, 10);
		expect(q90).toBeGreaterThan(150 + 45);
		expect(q90).toBeLessThan(150 + 2 * 45);
		// Round trip of the moments the quantile was built from.
		const c = conditionalMoments(mu, sigma)!;
		expect(c.meanMpc).toBeCloseTo(150, 8);
	});
});

describe('depthCheck', () => {
	it('gives verdicts from the numbers', () => {
		expect.hasAssertions();
		const base = { distanceMeanMpc: 100, distanceStdMpc: 25 };
		const q90 = distanceQuantile(100, 25, 0.9);
		const m90 = -16 + 5 * Math.log10(q90) + 25;
		const deep = depthCheck({ ...base, limitingMag: m90 + 0.01 });
		expect(deep.verdict).toBe('deep enough');
		expect(deep.marginMag).toBeCloseTo(0.01, 9);
		expect(deep.points.map((p) => p.label)).toEqual(['mean - std', 'mean', 'mean + std', '90% upper']);
		expect(deep.points[1].apparentMag).toBeCloseTo(19, 12);
		expect(deep.points[0].apparentMag).toBeCloseTo(-16 + 5 * Math.log10(75) + 25, 12);
		expect(depthCheck({ ...base, limitingMag: 19.5 }).verdict).toBe(m90 > 19.5 ? 'marginal' : 'deep enough');
		expect(depthCheck({ ...base, limitingMag: 18.9 }).verdict).toBe('too shallow');
		const red = depthCheck({ ...base, limitingMag: 19.2, extinctionMag: 0.5 });
		expect(red.points[1].apparentMag).toBeCloseTo(19.5, 12);
		expect(red.verdict).toBe('too shallow');
		expect(red.summary).toContain('too shallow');
		// A std wider than the ansatz allows falls back to the normal 90% point.
		expect(depthCheck({ distanceMeanMpc: 100, distanceStdMpc: 80, limitingMag: 20 }).points.at(-1)!.distanceMpc).toBeCloseTo(100 + 1.2815515655 * 80, 6);
	});
});
