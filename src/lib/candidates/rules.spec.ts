import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { absoluteMagnitude } from './lightcurve.ts';
import { readPhotometryCsv, type PhotometryPoint } from './photometry.ts';
import { checkThresholds, DEFAULT_KILONOVA_THRESHOLDS, evaluateRules, RULES, withDefaults, type KilonovaInputs } from './rules.ts';

const dir = new URL('../../../tests/fixtures/candidates/', import.meta.url);
const reference = JSON.parse(readFileSync(new URL('lightcurves.json', dir), 'utf8'));
const curve = (name: string) => readPhotometryCsv(readFileSync(new URL(`lightcurve-${name}.csv`, dir), 'utf8'));
const mergerTime: string = reference.mergerTime;

const kilonova: KilonovaInputs = { credibleLevel: 0.42, distancePValue: 0.31, mergerTime, photometry: curve('kilonova-like'), distanceMpc: 40, distanceErrMpc: 4 };
const status = (a: ReturnType<typeof evaluateRules>) => Object.fromEntries(a.rules.map((r) => [r.id, r.status]));

describe('kilonova-likeness rules', () => {
	it('a fast-fading, reddening source of the right brightness in the region is kilonova-like', () => {
		expect.hasAssertions();
		const a = evaluateRules(kilonova);
		expect(status(a)).toEqual({ inCredibleRegion: 'met', hostDistance: 'met', fastFade: 'met', reddening: 'met', peakLuminosity: 'met' });
		expect(a.verdict).toBe('kilonova-like');
		expect(a.reasons).toHaveLength(5);
		const fade = a.rules.find((r) => r.id === 'fastFade')!;
		// The fitted rate is the numpy-checked one (all g detections lie within 7 days of the merger).
		expect(fade.value).toBeCloseTo(reference.curves['kilonova-like'].filters.g.rateMagPerDay, 9);
		expect(fade.reason).toMatch(/^fades at g 0\.869 ± 0\.032 mag\/day, r 0\.552 ± 0\.035 mag\/day$/);
		const peak = a.rules.find((r) => r.id === 'peakLuminosity')!;
		const brightest = Math.min(...kilonova.photometry!.filter((p) => p.mag !== null).map((p) => p.mag!));
		expect(peak.value).toBeCloseTo(absoluteMagnitude(brightest, 40), 12);
	});

	it('a slowly evolving source fails the fade rule and is not kilonova-like', () => {
		expect.hasAssertions();
		const a = evaluateRules({ ...kilonova, photometry: curve('supernova-like') });
		expect(status(a).fastFade).toBe('not met');
		expect(a.verdict).toBe('not kilonova-like');
		expect(a.reasons[0]).toMatch(/^Fades faster than 0\.3 mag\/day within 7 days of the merger: no — fades at only i .* r /);
	});

	it('outside the credible region or at a distance that disagrees: not kilonova-like', () => {
		expect.hasAssertions();
		const far = evaluateRules({ ...kilonova, credibleLevel: 0.97 });
		expect(far.verdict).toBe('not kilonova-like');
		expect(far.reasons).toEqual(["Lies inside the merger's 90% credible region: no — it lies at the 97% credible level, outside the 90% region"]);
		expect(evaluateRules({ ...kilonova, credibleLevel: 0.93 }, withDefaults({ credibleRegion: { level: 0.95 } })).verdict).toBe('kilonova-like');
		expect(evaluateRules({ ...kilonova, distancePValue: 0.01 }).verdict).toBe('not kilonova-like');
	});

	it('with missing inputs the rules are not evaluated and the verdict is undecided', () => {
		expect.hasAssertions();
		const a = evaluateRules({ credibleLevel: 0.5 });
		expect(status(a)).toEqual({
			inCredibleRegion: 'met',
			hostDistance: 'not evaluated',
			fastFade: 'not evaluated',
			reddening: 'not evaluated',
			peakLuminosity: 'not evaluated'
		});
		expect(a.verdict).toBe('undecided');
		expect(a.reasons.slice(0, 2)).toEqual(['1 of 5 rules met; 3 needed and none failed', 'no light-curve rule (fading or reddening) is met yet']);
		expect(a.reasons).toContain('Fades faster than 0.3 mag/day within 7 days of the merger: not evaluated — the merger time is not known');
		expect(evaluateRules({}).rules.every((r) => r.status === 'not evaluated')).toBe(true);
	});

	it('position and distance alone are not enough when a light-curve rule is required', () => {
		expect.hasAssertions();
		const noLightCurve = { ...kilonova, photometry: kilonova.photometry!.filter((p) => p.filter !== 'r' && p.timeMs < Date.parse(mergerTime) + 0.5 * 86_400_000) };
		const a = evaluateRules(noLightCurve, withDefaults({ verdict: { minRulesMet: 2 } }));
		expect(status(a)).toMatchObject({ inCredibleRegion: 'met', hostDistance: 'met', fastFade: 'not evaluated', reddening: 'not evaluated' });
		expect(a.verdict).toBe('undecided');
		expect(evaluateRules(noLightCurve, withDefaults({ verdict: { minRulesMet: 2, needLightCurveRule: false } })).verdict).toBe('kilonova-like');
	});

	it('a rate too uncertain to clear or miss the threshold by one sigma decides nothing', () => {
		expect.hasAssertions();
		const t0 = Date.parse(mergerTime);
		const point = (days: number, mag: number, err: number): PhotometryPoint => ({
			time: new Date(t0 + days * 86_400_000).toISOString(),
			timeMs: t0 + days * 86_400_000,
			filter: 'r',
			mag,
			magErr: err,
			limitMag: null
		});
		// Two points 2 days apart: slope error √(σ₁² + σ₂²) / 2. At σ = 0.05 it is 0.0354, and 0.35 clears 0.3 by 1σ.
		const a = evaluateRules({ mergerTime, photometry: [point(1, 18, 0.05), point(3, 18.7, 0.05)] });
		const fade = a.rules.find((r) => r.id === 'fastFade')!;
		expect(fade.value).toBeCloseTo(0.35, 9);
		expect(fade.valueErr).toBeCloseTo(Math.SQRT2 * 0.05 / 2, 9);
		expect(fade.status).toBe('met');
		// With a 0.1 mag/day error it is neither met (0.25 < 0.3) nor failed (0.45 ≥ 0.3).
		const b = evaluateRules({ mergerTime, photometry: [point(1, 18, 0.1414214), point(3, 18.7, 0.1414214)] });
		expect(b.rules.find((r) => r.id === 'fastFade')!).toMatchObject({ status: 'not evaluated', valueErr: expect.closeTo(0.1, 6) });
		expect(b.rules.find((r) => r.id === 'fastFade')!.reason).toMatch(/^the fade rates are too uncertain to tell: r 0\.35 ± 0\.1 mag\/day$/);
	});

	it('too bright or too faint for a kilonova', () => {
		expect.hasAssertions();
		expect(evaluateRules({ ...kilonova, distanceMpc: 400, distanceErrMpc: 0 }).rules.find((r) => r.id === 'peakLuminosity')!.reason).toMatch(/too bright$/);
		expect(evaluateRules({ ...kilonova, distanceMpc: 2, distanceErrMpc: 0 }).rules.find((r) => r.id === 'peakLuminosity')!.status).toBe('not met');
	});

	it('thresholds are data: changes are marked, sources named, bad values refused', () => {
		expect.hasAssertions();
		const strict = evaluateRules(kilonova, withDefaults({ fastFade: { minRateMagPerDay: 1 } }));
		const fade = strict.rules.find((r) => r.id === 'fastFade')!;
		expect(fade).toMatchObject({ status: 'not met', label: 'Fades faster than 1 mag/day within 7 days of the merger' });
		expect(fade.source).toMatchObject({ kind: 'from memory', changedFromDefault: true });
		expect(strict.rules.filter((r) => r.source.changedFromDefault).map((r) => r.id)).toEqual(['fastFade']);
		expect(Object.values(RULES).map((r) => r.source.kind)).toEqual(['common practice', 'common practice', 'from memory', 'from memory', 'from memory']);
		expect(checkThresholds(DEFAULT_KILONOVA_THRESHOLDS)).toEqual([]);
		expect(checkThresholds(withDefaults({ credibleRegion: { level: 0.8 }, peakLuminosity: { brightestMag: -10 } }))).toEqual([
			'the credible level must be between 0.9 and 0.95',
			'the brightest absolute magnitude must be more negative than the faintest'
		]);
		expect(() => evaluateRules(kilonova, withDefaults({ verdict: { minRulesMet: 9 } }))).toThrow(
			'the rule thresholds cannot be used: the number of rules to meet must be a whole number from 1 to 5'
		);
	});
});
