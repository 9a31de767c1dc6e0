import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
	absoluteMagnitude,
	absoluteMagnitudeErr,
	brightestDetection,
	colourEvolution,
	MS_PER_DAY,
	summariseLightCurve,
	weightedLineFit
} from './lightcurve.ts';
import { readPhotometryCsv, type PhotometryPoint } from './photometry.ts';

const fixtures = new URL('../../../tests/fixtures/candidates/', import.meta.url);
// numpy.polyfit(t, mag, 1, w=1/err, cov='unscaled') and astropy Distance.distmod (make_lightcurves.py).
const reference = JSON.parse(readFileSync(new URL('lightcurves.json', fixtures), 'utf8'));
const curve = (name: string) => readPhotometryCsv(readFileSync(new URL(reference.curves[name].file, fixtures), 'utf8'));

function relClose(actual: number | null, expected: number | null, rel = 1e-9): void {
	if (expected === null) {
		expect(actual).toBeNull();
		return;
	}
	expect(actual).not.toBeNull();
	expect(Math.abs(actual! - expected)).toBeLessThanOrEqual(rel * Math.abs(expected) + 1e-12);
}

describe('fade rates against numpy weighted least squares', () => {
	for (const name of ['kilonova-like', 'supernova-like', 'edge-cases']) {
		it(`${name}: counts, rates, errors, first and last detection per filter`, () => {
			expect.hasAssertions();
			const got = summariseLightCurve(curve(name));
			const want = reference.curves[name].filters;
			expect(Object.keys(got)).toEqual(Object.keys(want).sort());
			for (const [filter, w] of Object.entries<Record<string, number | string | null>>(want)) {
				const g = got[filter];
				expect(g.detections).toBe(w.detections);
				expect(g.upperLimits).toBe(w.upperLimits);
				relClose(g.rateMagPerDay, w.rateMagPerDay as number | null);
				relClose(g.rateErr, w.rateErr as number | null);
				expect(g.first).toBe(w.first === null ? null : new Date(w.first as string).toISOString());
				expect(g.last).toBe(w.last === null ? null : new Date(w.last as string).toISOString());
			}
		});
	}

	it('has no rate with one detection or with all detections at one time', () => {
		expect.hasAssertions();
		const got = summariseLightCurve(curve('edge-cases'));
		expect(got.z).toMatchObject({ detections: 1, rateMagPerDay: null, rateErr: null });
		expect(got.y).toMatchObject({ detections: 2, rateMagPerDay: null, rateErr: null });
		expect(got.u).toMatchObject({ detections: 0, upperLimits: 2, first: null, last: null });
	});

	it('restricts counts and fits to a time window', () => {
		expect.hasAssertions();
		const pts = curve('kilonova-like');
		const merger = Date.parse(reference.mergerTime);
		const all = summariseLightCurve(pts);
		const early = summariseLightCurve(pts, { fromMs: merger, toMs: merger + 2 * MS_PER_DAY });
		expect(early.g.detections).toBe(3);
		expect(early.g.upperLimits).toBe(0);
		expect(early.g.rateMagPerDay).not.toBe(all.g.rateMagPerDay);
	});
});

describe('weighted line fit', () => {
	it('recovers an exact line, and the unscaled slope error is 1/sqrt(Σw(x − x̄)²)', () => {
		expect.hasAssertions();
		// y = 2 + 0.5x exactly; σ = 0.1, 0.2, 0.1 → w = 100, 25, 100; x̄ = (0·100 + 1·25 + 3·100)/225.
		const fit = weightedLineFit([0, 1, 3], [2, 2.5, 3.5], [0.1, 0.2, 0.1])!;
		expect(fit.slope).toBeCloseTo(0.5, 12);
		const xbar = 325 / 225;
		const sxx = 100 * xbar ** 2 + 25 * (1 - xbar) ** 2 + 100 * (3 - xbar) ** 2;
		expect(fit.slopeErr).toBeCloseTo(Math.sqrt(1 / sxx), 12);
		// The unscaled error does not shrink when the points happen to lie exactly on the line.
		expect(fit.slopeErr).toBeGreaterThan(0.03);
	});

	it('stays accurate with times in days since 1970 (no cancellation)', () => {
		expect.hasAssertions();
		const t0 = 20_424.128; // days since 1970 in 2025
		const fit = weightedLineFit([t0, t0 + 0.5, t0 + 1.25], [18, 18.4, 19], [0.05, 0.05, 0.05])!;
		const ref = weightedLineFit([0, 0.5, 1.25], [18, 18.4, 19], [0.05, 0.05, 0.05])!;
		expect(fit.slope).toBeCloseTo(ref.slope, 9);
		expect(fit.slopeErr).toBeCloseTo(ref.slopeErr, 9);
	});

	it('refuses non-positive errors', () => {
		expect.hasAssertions();
		expect(() => weightedLineFit([0, 1], [1, 2], [0.1, 0])).toThrow(/sigma\[1\] must be a positive number/);
	});
});

describe('colour and absolute magnitude', () => {
	it('g − r pairs and their change per day agree with numpy', () => {
		expect.hasAssertions();
		const want = reference.curves['kilonova-like'].colour;
		const got = colourEvolution(curve('kilonova-like'), 'g', 'r');
		expect(got.pairs.length).toBe(want.pairs.length);
		const merger = Date.parse(reference.mergerTime);
		got.pairs.forEach((p, k) => {
			expect(p.colourMag).toBeCloseTo(want.pairs[k].colour, 10);
			expect(p.colourErr).toBeCloseTo(want.pairs[k].colourErr, 12);
			expect((p.timeMs - merger) / MS_PER_DAY).toBeCloseTo(want.pairs[k].days, 9);
		});
		relClose(got.rateMagPerDay, want.rateMagPerDay);
		relClose(got.rateErr, want.rateErr);
	});

	it('pairs closest first and uses each detection once', () => {
		expect.hasAssertions();
		const at = (filter: string, hours: number, mag: number): PhotometryPoint => {
			const timeMs = Date.UTC(2026, 11, 2) + hours * 3_600_000;
			return { time: new Date(timeMs).toISOString(), timeMs, filter, mag, magErr: 0.1, limitMag: null };
		};
		// Two g points 2 h and 3 h from one r point: only the nearer g is paired; r at 20 h is outside 0.5 d of both.
		const got = colourEvolution([at('g', 0, 19), at('g', 5, 19.2), at('r', 2, 18.5), at('r', 20, 18.7)], 'g', 'r');
		expect(got.pairs.map((p) => [p.colourMag, p.separationDays])).toEqual([[19 - 18.5, 2 / 24]]);
		expect(got.rateMagPerDay).toBeNull();
		expect(colourEvolution([at('g', 0, 19), at('r', 11, 18.5)], 'g', 'r', { windowDays: 0.25 }).pairs).toEqual([]);
	});

	it('absolute magnitude matches astropy distmod; error propagation is first order', () => {
		expect.hasAssertions();
		for (const r of reference.absoluteMagnitudes) expect(absoluteMagnitude(r.apparentMag, r.distanceMpc)).toBeCloseTo(r.absoluteMag, 10);
		expect(() => absoluteMagnitude(18, 0)).toThrow(/positive number of Mpc/);
		expect(absoluteMagnitudeErr(0.1, 40)).toBe(0.1);
		// 10% distance error → 5/ln10 · 0.1 = 0.2171 mag.
		expect(absoluteMagnitudeErr(0, 40, 4)).toBeCloseTo(0.21715, 5);
	});

	it('finds the brightest detection, ignoring upper limits', () => {
		expect.hasAssertions();
		const pts = curve('kilonova-like');
		const b = brightestDetection(pts)!;
		const mags = pts.filter((p) => p.mag !== null).map((p) => p.mag!);
		expect(b.mag).toBe(Math.min(...mags));
		expect(brightestDetection(pts, { filters: ['i'] })).toBeNull();
	});
});
