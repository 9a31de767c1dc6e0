import { describe, expect, it } from 'vitest';
import { DEFAULT_KILONOVA_THRESHOLDS, RULES, THRESHOLD_RANGES, thresholdProblems, withDefaults } from './rules.ts';
import { changesFrom, formValuesOf, rangeText, THRESHOLD_FIELDS, THRESHOLD_SECTIONS, thresholdsFromForm } from './threshold-form.ts';

const defaults = () => formValuesOf(DEFAULT_KILONOVA_THRESHOLDS);

describe('the kilonova thresholds as a form', () => {
	it('lists every rule with its stored source, and every number the thresholds hold', () => {
		expect.hasAssertions();
		expect(THRESHOLD_SECTIONS.filter((s) => s.id !== 'general').map((s) => s.id)).toEqual(Object.keys(RULES));
		for (const s of THRESHOLD_SECTIONS) if (s.id !== 'general') expect(s.source).toBe(RULES[s.id].source);
		const names = THRESHOLD_FIELDS.map((f) => f.name);
		for (const path of Object.keys(THRESHOLD_RANGES)) expect(names).toContain(path);
		expect(names).toContain('verdict.minRulesMet');
		expect(new Set(names).size).toBe(names.length);
		expect(rangeText('credibleRegion.level')).toBe('0.9 to 0.95');
		expect(rangeText('verdict.minRulesMet')).toBe('1 to 5');
		expect(rangeText('fastFade.filters')).toBeNull();
	});

	it('reads back the defaults it writes, and then nothing has changed', () => {
		expect.hasAssertions();
		const values = defaults();
		expect(values['reddening.colours']).toBe('g−r, g−i, r−i, B−V, V−R');
		expect(values['verdict.needLightCurveRule']).toBe('on');
		const read = thresholdsFromForm(values);
		expect(read.errors).toBeUndefined();
		expect(read.thresholds).toEqual(DEFAULT_KILONOVA_THRESHOLDS);
		expect(changesFrom(read.thresholds!)).toEqual({});
	});

	it('keeps only what differs from the defaults; an unticked box is false; a minus sign and plain hyphens both read', () => {
		expect.hasAssertions();
		const values: Record<string, unknown> = { ...defaults(), 'fastFade.minRateMagPerDay': ' 0.45 ', 'peakLuminosity.faintestMag': '−11.5', 'reddening.colours': 'g-r, r - i', 'fastFade.filters': 'g r,i' };
		delete values['verdict.needLightCurveRule'];
		const read = thresholdsFromForm(values);
		expect(read.errors).toBeUndefined();
		const changes = changesFrom(read.thresholds!);
		expect(changes).toEqual({
			fastFade: { minRateMagPerDay: 0.45, filters: ['g', 'r', 'i'] },
			reddening: {
				colours: [
					['g', 'r'],
					['r', 'i']
				]
			},
			peakLuminosity: { faintestMag: -11.5 },
			verdict: { needLightCurveRule: false }
		});
		// Laid over the defaults, the changes give back what the form said.
		expect(withDefaults(changes)).toEqual(read.thresholds);
	});

	it('names each field it cannot read, in the form’s words', () => {
		expect.hasAssertions();
		const read = thresholdsFromForm({
			...defaults(),
			'fastFade.minRateMagPerDay': 'fast',
			'fastFade.withinDays': '',
			'verdict.minRulesMet': '2.5',
			'reddening.colours': 'g−r, gr',
			'peakLuminosity.filters': ' , ',
			'credibleRegion.level': undefined
		});
		expect(read.errors).toEqual({
			'fastFade.minRateMagPerDay': 'Fade rate (mag/day) must be a number.',
			'fastFade.withinDays': 'Fade window (days) is missing.',
			'verdict.minRulesMet': 'Rules to meet must be a whole number.',
			'reddening.colours': 'Colours: “gr” is not a pair written blue−red (for example g−r).',
			'peakLuminosity.filters': 'Filters for the brightness: give at least one filter name.',
			'credibleRegion.level': 'Credible level is missing.'
		});
		// A value that reads but is out of range is named in the same round as one that does not read.
		expect(thresholdsFromForm({ ...defaults(), 'fastFade.minRateMagPerDay': 'fast', 'fastFade.withinDays': '90' }).errors).toEqual({
			'fastFade.minRateMagPerDay': 'Fade rate (mag/day) must be a number.',
			'fastFade.withinDays': 'The fade window must be between 0.5 days and 60 days.'
		});
		expect(thresholdsFromForm({ ...defaults(), 'reddening.colours': 'r−r' }).errors).toEqual({ 'reddening.colours': 'Colours: “r−r” pairs a filter with itself.' });
	});

	it('reads values out of range as they are: the rules’ own check names them per field', () => {
		expect.hasAssertions();
		const read = thresholdsFromForm({ ...defaults(), 'credibleRegion.level': '0.5', 'peakLuminosity.brightestMag': '-10' });
		expect(read.thresholds?.credibleRegion.level).toBe(0.5);
		expect(thresholdProblems(read.thresholds!)).toEqual([
			{ field: 'credibleRegion.level', message: 'the credible level must be between 0.9 and 0.95' },
			{ field: 'peakLuminosity.brightestMag', message: 'the brightest absolute magnitude must be more negative than the faintest' }
		]);
	});
});
