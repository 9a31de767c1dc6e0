/**
 * The kilonova thresholds as a form: the fields of each rule with their unit and meaning, the
 * text a form shows for a set of thresholds, reading a submitted form back (zod, one message per
 * field in the form's words), and the coordinators' changes as the difference from the defaults.
 * Ranges and the checks across fields stay in rules.ts (`THRESHOLD_RANGES`, `thresholdProblems`);
 * this module only turns text into numbers and lists. Pure.
 */
import { z } from 'zod';
import {
	DEFAULT_KILONOVA_THRESHOLDS,
	problemsByField,
	RULES,
	THRESHOLD_RANGES,
	thresholdProblems,
	type KilonovaThresholds,
	type RuleId,
	type RuleSource,
	type ThresholdChanges,
	type ThresholdNumberPath
} from './rules.ts';

export type ThresholdFieldKind = 'number' | 'integer' | 'filters' | 'colours' | 'boolean';

export interface ThresholdField {
	/** The value's path in the thresholds, and the form field's name. */
	name: string;
	label: string;
	/** The unit, '' for a pure number. */
	unit: string;
	/** What the number does, in a sentence. */
	meaning: string;
	kind: ThresholdFieldKind;
}

export interface ThresholdSection {
	/** A rule, or 'general' for the settings every rule and the verdict share. */
	id: RuleId | 'general';
	title: string;
	/** The rule's source as stored (published / common practice / from memory); null for our own settings. */
	source: RuleSource | null;
	fields: ThresholdField[];
}

/** Most filter names a list may hold, and the longest name (as the API takes them). */
const MAX_FILTERS = 40;
const MAX_FILTER_CHARS = 20;
const MAX_COLOURS = 20;

/** Every editable threshold, rule by rule, in the order the page shows them. */
export const THRESHOLD_SECTIONS: ThresholdSection[] = [
	{
		id: 'inCredibleRegion',
		title: 'In the credible region',
		source: RULES.inCredibleRegion.source,
		fields: [
			{
				name: 'credibleRegion.level',
				label: 'Credible level',
				unit: '',
				meaning: 'The candidate must lie inside the smallest part of the sky map holding this share of the probability (0.9 = the 90% region).',
				kind: 'number'
			}
		]
	},
	{
		id: 'hostDistance',
		title: 'Host distance agrees',
		source: RULES.hostDistance.source,
		fields: [
			{
				name: 'hostDistance.minPValue',
				label: 'Smallest distance p-value',
				unit: '',
				meaning: 'The host galaxy’s distance fails the rule when the merger’s distance posterior gives it a two-sided tail probability below this.',
				kind: 'number'
			}
		]
	},
	{
		id: 'fastFade',
		title: 'Fades fast',
		source: RULES.fastFade.source,
		fields: [
			{ name: 'fastFade.minRateMagPerDay', label: 'Fade rate', unit: 'mag/day', meaning: 'Met when the fitted fade rate in one of the filters is faster than this.', kind: 'number' },
			{ name: 'fastFade.withinDays', label: 'Fade window', unit: 'days', meaning: 'Only detections this long after the merger are fitted.', kind: 'number' },
			{ name: 'fastFade.filters', label: 'Filters for the fade', unit: '', meaning: 'Filter names, separated by commas (matched regardless of case).', kind: 'filters' }
		]
	},
	{
		id: 'reddening',
		title: 'Turns redder',
		source: RULES.reddening.source,
		fields: [
			{ name: 'reddening.minRateMagPerDay', label: 'Colour rate', unit: 'mag/day', meaning: 'Met when the blue − red colour rises faster than this (positive = getting redder).', kind: 'number' },
			{ name: 'reddening.withinDays', label: 'Colour window', unit: 'days', meaning: 'Only measurements this long after the merger count.', kind: 'number' },
			{ name: 'reddening.pairWindowDays', label: 'Pairing window', unit: 'days', meaning: 'A blue and a red measurement at most this far apart make one colour.', kind: 'number' },
			{ name: 'reddening.colours', label: 'Colours', unit: '', meaning: 'Pairs written blue−red, separated by commas; the first pair that can be measured is used.', kind: 'colours' }
		]
	},
	{
		id: 'peakLuminosity',
		title: 'Kilonova brightness',
		source: RULES.peakLuminosity.source,
		fields: [
			{ name: 'peakLuminosity.brightestMag', label: 'Brightest absolute magnitude', unit: 'mag', meaning: 'The brightest detection may be no brighter than this (more negative = brighter).', kind: 'number' },
			{ name: 'peakLuminosity.faintestMag', label: 'Faintest absolute magnitude', unit: 'mag', meaning: 'The brightest detection may be no fainter than this.', kind: 'number' },
			{ name: 'peakLuminosity.filters', label: 'Filters for the brightness', unit: '', meaning: 'Filter names, separated by commas.', kind: 'filters' }
		]
	},
	{
		id: 'general',
		title: 'Deciding and the verdict',
		source: null,
		fields: [
			{
				name: 'decisionSigma',
				label: 'Decision sigma',
				unit: 'σ',
				meaning: 'A measured rate or magnitude decides a rule only when it clears the threshold by this many standard errors.',
				kind: 'number'
			},
			{ name: 'verdict.minRulesMet', label: 'Rules to meet', unit: '', meaning: 'With none failed, this many rules met make a candidate kilonova-like.', kind: 'integer' },
			{
				name: 'verdict.needLightCurveRule',
				label: 'One of them must be fading or reddening',
				unit: '',
				meaning: 'Position and distance alone say nothing about what the transient is.',
				kind: 'boolean'
			}
		]
	}
];

export const THRESHOLD_FIELDS: ThresholdField[] = THRESHOLD_SECTIONS.flatMap((s) => s.fields);

/** The range a number may take, as the form states it ("0.9 to 0.95"), or null. */
export function rangeText(name: string): string | null {
	if (name === 'verdict.minRulesMet') return `1 to ${Object.keys(RULES).length}`;
	const r = THRESHOLD_RANGES[name as Exclude<ThresholdNumberPath, 'verdict.minRulesMet'>];
	return r ? `${r.min} to ${r.max}` : null;
}

const COLOUR_SEPARATOR = /\s*[−–-]\s*/;

/** A threshold as the form writes it: numbers as they are, lists joined by ", ", colours "g−r", booleans 'on' or ''. */
export function fieldText(t: KilonovaThresholds, field: ThresholdField): string {
	const v = field.name.split('.').reduce<unknown>((x, k) => (x as Record<string, unknown>)[k], t);
	switch (field.kind) {
		case 'filters':
			return (v as string[]).join(', ');
		case 'colours':
			return (v as [string, string][]).map(([blue, red]) => `${blue}−${red}`).join(', ');
		case 'boolean':
			return v ? 'on' : '';
		default:
			return String(v);
	}
}

/** Every field's text for a set of thresholds, keyed by field name. */
export function formValuesOf(t: KilonovaThresholds): Record<string, string> {
	return Object.fromEntries(THRESHOLD_FIELDS.map((f) => [f.name, fieldText(t, f)]));
}

const labelOf = (f: ThresholdField) => (f.unit ? `${f.label} (${f.unit})` : f.label);

function numberField(f: ThresholdField) {
	const label = labelOf(f);
	return z
		.string({ error: `${label} is missing.` })
		.trim()
		.min(1, `${label} is missing.`)
		.transform((s, ctx) => {
			const n = Number(s.replace('−', '-'));
			if (!Number.isFinite(n)) {
				ctx.addIssue({ code: 'custom', message: `${label} must be a number.` });
				return z.NEVER;
			}
			if (f.kind === 'integer' && !Number.isInteger(n)) {
				ctx.addIssue({ code: 'custom', message: `${label} must be a whole number.` });
				return z.NEVER;
			}
			return n;
		});
}

function filtersField(f: ThresholdField) {
	return z
		.string({ error: `${f.label} are missing.` })
		.transform((s, ctx) => {
			const names = s
				.split(/[\s,]+/)
				.map((x) => x.trim())
				.filter(Boolean);
			const problem =
				names.length === 0
					? `${f.label}: give at least one filter name.`
					: names.length > MAX_FILTERS
						? `${f.label}: at most ${MAX_FILTERS} filters.`
						: names.find((x) => x.length > MAX_FILTER_CHARS)
							? `${f.label}: a filter name may be at most ${MAX_FILTER_CHARS} characters.`
							: null;
			if (problem) {
				ctx.addIssue({ code: 'custom', message: problem });
				return z.NEVER;
			}
			return names;
		});
}

function coloursField(f: ThresholdField) {
	return z
		.string({ error: `${f.label} are missing.` })
		.transform((s, ctx) => {
			const pairs = s
				.split(',')
				.map((x) => x.trim())
				.filter(Boolean);
			if (pairs.length === 0 || pairs.length > MAX_COLOURS) {
				ctx.addIssue({ code: 'custom', message: `${f.label}: give from 1 to ${MAX_COLOURS} pairs, written blue−red (for example g−r, r−i).` });
				return z.NEVER;
			}
			const out: [string, string][] = [];
			for (const p of pairs) {
				const parts = p.split(COLOUR_SEPARATOR);
				if (parts.length !== 2 || !parts[0] || !parts[1] || parts.some((x) => x.length > MAX_FILTER_CHARS || /\s/.test(x))) {
					ctx.addIssue({ code: 'custom', message: `${f.label}: “${p}” is not a pair written blue−red (for example g−r).` });
					return z.NEVER;
				}
				if (parts[0] === parts[1]) {
					ctx.addIssue({ code: 'custom', message: `${f.label}: “${p}” pairs a filter with itself.` });
					return z.NEVER;
				}
				out.push([parts[0], parts[1]]);
			}
			return out;
		});
}

/** The form's schema: each field's text to its value, with a message naming the field as the form labels it. */
export const thresholdForm = z.object(
	Object.fromEntries(
		THRESHOLD_FIELDS.map((f) => [
			f.name,
			f.kind === 'number' || f.kind === 'integer'
				? numberField(f)
				: f.kind === 'filters'
					? filtersField(f)
					: f.kind === 'colours'
						? coloursField(f)
						: z
							.unknown()
							.optional()
							.transform((v) => v === 'on' || v === 'true' || v === true)
		])
	)
);

/**
 * Read a submitted form (field name → text; a checkbox left unticked is absent) into thresholds,
 * or the message for each field that needs fixing: the ones that cannot be read, and at the same
 * time those the rules' own check (`thresholdProblems`) refuses, judged with the defaults in place
 * of the unreadable ones, so that one round of fixing is enough. The saved thresholds go through
 * the same check again.
 */
export function thresholdsFromForm(values: Record<string, unknown>): { thresholds: KilonovaThresholds; errors?: never } | { errors: Record<string, string>; thresholds?: never } {
	const errors: Record<string, string> = {};
	const t = structuredClone(DEFAULT_KILONOVA_THRESHOLDS) as unknown as Record<string, Record<string, unknown>>;
	for (const f of THRESHOLD_FIELDS) {
		const parsed = thresholdForm.shape[f.name].safeParse(values[f.name]);
		if (!parsed.success) {
			errors[f.name] = parsed.error.issues[0]?.message ?? `${f.label} cannot be read.`;
			continue;
		}
		const [section, key] = f.name.split('.');
		if (key === undefined) (t as Record<string, unknown>)[section] = parsed.data;
		else t[section][key] = parsed.data;
	}
	const thresholds = t as unknown as KilonovaThresholds;
	if (Object.keys(errors).length === 0) return { thresholds };
	for (const [field, message] of Object.entries(problemsByField(thresholdProblems(thresholds)))) errors[field] ??= message;
	return { errors };
}

/** The coordinators' changes: only the values that differ from `defaults`, section by section (`{}` when none do). */
export function changesFrom(t: KilonovaThresholds, defaults: KilonovaThresholds = DEFAULT_KILONOVA_THRESHOLDS): ThresholdChanges {
	const changes: Record<string, unknown> = {};
	for (const key of Object.keys(defaults) as (keyof KilonovaThresholds)[]) {
		const now = t[key];
		const before = defaults[key];
		if (typeof before !== 'object') {
			if (now !== before) changes[key] = now;
			continue;
		}
		const section: Record<string, unknown> = {};
		for (const [k, d] of Object.entries(before)) {
			const value = (now as Record<string, unknown>)[k];
			if (JSON.stringify(value) !== JSON.stringify(d)) section[k] = value;
		}
		if (Object.keys(section).length) changes[key] = section;
	}
	return changes as ThresholdChanges;
}
