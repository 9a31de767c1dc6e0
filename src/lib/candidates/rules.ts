/**
 * Is a candidate kilonova-like? A handful of plain rules, each answered "met", "not met" or "not
 * evaluated" (an input is missing, or a measurement is too uncertain to tell), and a verdict from
 * them. The numbers the rules use are data (`KilonovaThresholds`), so a coordinator can change them
 * without touching code; every rule names where its default comes from ("published" with a
 * reference, "common practice", or "from memory") and says when a coordinator changed it.
 *
 * Measured quantities (rates, absolute magnitude) decide only when they clear a threshold by
 * `decisionSigma` standard errors: a rate of 0.35 ± 0.1 mag/day neither meets nor fails a
 * 0.3 mag/day threshold at 1σ. Pure: takes numbers and photometry points, returns results.
 */
import { absoluteMagnitude, absoluteMagnitudeErr, brightestDetection, colourEvolution, MS_PER_DAY, summariseLightCurve } from './lightcurve.ts';
import type { PhotometryPoint } from './photometry.ts';

export type RuleId = 'inCredibleRegion' | 'hostDistance' | 'fastFade' | 'reddening' | 'peakLuminosity';
export type RuleStatus = 'met' | 'not met' | 'not evaluated';
export type SourceKind = 'published' | 'common practice' | 'from memory';

export interface RuleSource {
	kind: SourceKind;
	/** The reference (for "published"), or what the number rests on. */
	reference: string;
}

export interface KilonovaThresholds {
	/** How many standard errors a measurement must clear a threshold by to decide a rule (0–5). */
	decisionSigma: number;
	/** Credible region the candidate must lie in, as a fraction (0.90–0.95). */
	credibleRegion: { level: number };
	/** Smallest two-sided tail probability of the host's distance under the merger's distance posterior. */
	hostDistance: { minPValue: number };
	/** Fade faster than minRateMagPerDay in at least one of `filters`, fitted on detections within `withinDays` of the merger. */
	fastFade: { minRateMagPerDay: number; withinDays: number; filters: string[] };
	/** Colour (blue − red, first listed pair that can be measured) rising faster than minRateMagPerDay within `withinDays`. */
	reddening: { minRateMagPerDay: number; withinDays: number; colours: [string, string][]; pairWindowDays: number };
	/** Absolute magnitude of the brightest detection in `filters` between `brightestMag` and `faintestMag`. */
	peakLuminosity: { brightestMag: number; faintestMag: number; filters: string[] };
	/** Rules that must be met for "kilonova-like", and whether one of them must come from the light curve. */
	verdict: { minRulesMet: number; needLightCurveRule: boolean };
}

const OPTICAL = ['u', 'g', 'r', 'i', 'z', 'U', 'B', 'V', 'R', 'I', 'o', 'c', 'w', 'clear'];

/** Defaults; see RULES for where each number comes from. The decision sigma and verdict counts are our own choice. */
export const DEFAULT_KILONOVA_THRESHOLDS: KilonovaThresholds = {
	decisionSigma: 1,
	credibleRegion: { level: 0.9 },
	hostDistance: { minPValue: 0.05 },
	fastFade: { minRateMagPerDay: 0.3, withinDays: 7, filters: OPTICAL },
	reddening: {
		minRateMagPerDay: 0,
		withinDays: 7,
		colours: [
			['g', 'r'],
			['g', 'i'],
			['r', 'i'],
			['B', 'V'],
			['V', 'R']
		],
		pairWindowDays: 0.5
	},
	peakLuminosity: { brightestMag: -17, faintestMag: -12, filters: OPTICAL },
	verdict: { minRulesMet: 3, needLightCurveRule: true }
};

interface RuleDefinition {
	/** The rule in our words, with the thresholds filled in. */
	label(t: KilonovaThresholds): string;
	source: RuleSource;
	/** The part of the thresholds this rule uses. */
	thresholds(t: KilonovaThresholds): Record<string, unknown>;
}

const AT2017GFO =
	'AT2017gfo, the kilonova of GW170817 (Cowperthwaite et al. 2017, ApJL 848, L17; Drout et al. 2017, Science 358, 1570)';

export const RULES: Record<RuleId, RuleDefinition> = {
	inCredibleRegion: {
		label: (t) => `Lies inside the merger's ${fmt(t.credibleRegion.level * 100)}% credible region`,
		source: { kind: 'common practice', reference: 'follow-up searches cover the 90% credible region of the sky map' },
		thresholds: (t) => ({ ...t.credibleRegion })
	},
	hostDistance: {
		label: (t) => `Host galaxy's distance agrees with the merger's (two-sided p ≥ ${fmt(t.hostDistance.minPValue)})`,
		source: { kind: 'common practice', reference: 'p ≥ 0.05, about 2σ for a normal distribution' },
		thresholds: (t) => ({ ...t.hostDistance })
	},
	fastFade: {
		label: (t) => `Fades faster than ${fmt(t.fastFade.minRateMagPerDay)} mag/day within ${fmt(t.fastFade.withinDays)} days of the merger`,
		source: {
			kind: 'from memory',
			reference: `${AT2017GFO} faded by roughly 0.5–1 mag/day in g and r during its first week; supernovae fade by about 0.1 mag/day or less`
		},
		thresholds: (t) => ({ ...t.fastFade, decisionSigma: t.decisionSigma })
	},
	reddening: {
		label: (t) => `Turns redder with time: blue − red colour rises by more than ${fmt(t.reddening.minRateMagPerDay)} mag/day within ${fmt(t.reddening.withinDays)} days`,
		source: { kind: 'from memory', reference: `${AT2017GFO}: g − r rose by roughly 1 mag over its first week` },
		thresholds: (t) => ({ ...t.reddening, decisionSigma: t.decisionSigma })
	},
	peakLuminosity: {
		label: (t) => `Brightest detection between absolute magnitude ${fmt(t.peakLuminosity.brightestMag)} and ${fmt(t.peakLuminosity.faintestMag)}`,
		source: {
			kind: 'from memory',
			reference: `${AT2017GFO} peaked near M ≈ −15.5 to −16 in the optical; kilonova models span roughly −12 to −17 (Metzger 2019, Living Reviews in Relativity 23, 1)`
		},
		thresholds: (t) => ({ ...t.peakLuminosity, decisionSigma: t.decisionSigma })
	}
};

export interface KilonovaInputs {
	/** Credible level of the candidate's direction in the sky map (0–1; smaller = more probable). */
	credibleLevel?: number | null;
	/** Two-sided tail probability 2·min(F, 1 − F) of the host's distance under the distance posterior. */
	distancePValue?: number | null;
	/** Merger time, ISO 8601 or ms since 1970. */
	mergerTime?: string | number | null;
	photometry?: readonly PhotometryPoint[] | null;
	/** Distance used for absolute magnitudes (the host's, or the merger's along the line of sight), Mpc. */
	distanceMpc?: number | null;
	distanceErrMpc?: number | null;
}

export interface RuleResult {
	id: RuleId;
	label: string;
	status: RuleStatus;
	/** Why, with the numbers, in plain words. */
	reason: string;
	/** The measured value and its standard error, where the rule measures one. */
	value: number | null;
	valueErr: number | null;
	thresholds: Record<string, unknown>;
	source: RuleSource & { changedFromDefault: boolean };
}

export type KilonovaVerdict = 'kilonova-like' | 'not kilonova-like' | 'undecided';

export interface KilonovaAssessment {
	verdict: KilonovaVerdict;
	/** Sentences behind the verdict. */
	reasons: string[];
	rules: RuleResult[];
	thresholds: KilonovaThresholds;
}

function fmt(x: number, digits = 3): string {
	return String(Number(x.toPrecision(digits))).replace('-', '−');
}

/** A coordinator's changes: any section in part; the rest keeps its default. */
export type ThresholdChanges = { decisionSigma?: number } & {
	[K in Exclude<keyof KilonovaThresholds, 'decisionSigma'>]?: Partial<KilonovaThresholds[K]>;
};

/** Thresholds with a coordinator's changes laid over the defaults, section by section. */
export function withDefaults(changes: ThresholdChanges = {}): KilonovaThresholds {
	const d = DEFAULT_KILONOVA_THRESHOLDS;
	return {
		decisionSigma: changes.decisionSigma ?? d.decisionSigma,
		credibleRegion: { ...d.credibleRegion, ...changes.credibleRegion },
		hostDistance: { ...d.hostDistance, ...changes.hostDistance },
		fastFade: { ...d.fastFade, ...changes.fastFade },
		reddening: { ...d.reddening, ...changes.reddening },
		peakLuminosity: { ...d.peakLuminosity, ...changes.peakLuminosity },
		verdict: { ...d.verdict, ...changes.verdict }
	};
}

/** A number the thresholds hold, by its path in `KilonovaThresholds`. */
export type ThresholdNumberPath =
	| 'decisionSigma'
	| 'credibleRegion.level'
	| 'hostDistance.minPValue'
	| 'fastFade.minRateMagPerDay'
	| 'fastFade.withinDays'
	| 'reddening.minRateMagPerDay'
	| 'reddening.withinDays'
	| 'reddening.pairWindowDays'
	| 'peakLuminosity.brightestMag'
	| 'peakLuminosity.faintestMag'
	| 'verdict.minRulesMet';

/**
 * The range (inclusive) each number may take, in its own unit, with the words that name it.
 * The ranges keep a threshold meaningful (a credible level below 90% would flag candidates
 * outside the region searched; common practice); they are not physics.
 */
export const THRESHOLD_RANGES: Record<Exclude<ThresholdNumberPath, 'verdict.minRulesMet'>, { what: string; min: number; max: number; unit: string }> = {
	decisionSigma: { what: 'the decision sigma', min: 0, max: 5, unit: '' },
	'credibleRegion.level': { what: 'the credible level', min: 0.9, max: 0.95, unit: '' },
	'hostDistance.minPValue': { what: 'the smallest distance p-value', min: 0.001, max: 0.5, unit: '' },
	'fastFade.minRateMagPerDay': { what: 'the fade rate', min: 0, max: 5, unit: ' mag/day' },
	'fastFade.withinDays': { what: 'the fade window', min: 0.5, max: 60, unit: ' days' },
	'reddening.minRateMagPerDay': { what: 'the colour rate', min: -2, max: 2, unit: ' mag/day' },
	'reddening.withinDays': { what: 'the colour window', min: 0.5, max: 60, unit: ' days' },
	'reddening.pairWindowDays': { what: 'the pairing window', min: 0, max: 2, unit: ' days' },
	'peakLuminosity.brightestMag': { what: 'the brightest absolute magnitude', min: -25, max: 0, unit: '' },
	'peakLuminosity.faintestMag': { what: 'the faintest absolute magnitude', min: -25, max: 0, unit: '' }
};

/** The value at a dotted path of the thresholds (`fastFade.minRateMagPerDay`). */
export function thresholdAt(t: KilonovaThresholds, path: string): unknown {
	return path.split('.').reduce<unknown>((v, k) => (v && typeof v === 'object' ? (v as Record<string, unknown>)[k] : undefined), t);
}

/** One thing wrong with a set of thresholds: the path of the value it is about, and the problem in plain words. */
export interface ThresholdProblem {
	field: string;
	message: string;
}

/** What is wrong with a set of thresholds, each with the value it is about; empty when they can be used. */
export function thresholdProblems(t: KilonovaThresholds): ThresholdProblem[] {
	const problems: ThresholdProblem[] = [];
	for (const [field, r] of Object.entries(THRESHOLD_RANGES)) {
		const v = thresholdAt(t, field);
		if (typeof v !== 'number' || !Number.isFinite(v) || v < r.min || v > r.max) {
			problems.push({ field, message: `${r.what} must be between ${r.min}${r.unit} and ${r.max}${r.unit}` });
		}
	}
	if (t.peakLuminosity.brightestMag >= t.peakLuminosity.faintestMag) {
		problems.push({ field: 'peakLuminosity.brightestMag', message: 'the brightest absolute magnitude must be more negative than the faintest' });
	}
	if (!Array.isArray(t.fastFade.filters) || t.fastFade.filters.length === 0) problems.push({ field: 'fastFade.filters', message: 'the fade rule needs at least one filter' });
	if (!Array.isArray(t.peakLuminosity.filters) || t.peakLuminosity.filters.length === 0) {
		problems.push({ field: 'peakLuminosity.filters', message: 'the brightness rule needs at least one filter' });
	}
	if (!Array.isArray(t.reddening.colours) || t.reddening.colours.length === 0 || t.reddening.colours.some((c) => !Array.isArray(c) || c.length !== 2 || c[0] === c[1])) {
		problems.push({ field: 'reddening.colours', message: 'the colour rule needs at least one pair of two different filters' });
	}
	const ruleCount = Object.keys(RULES).length;
	if (!Number.isInteger(t.verdict.minRulesMet) || t.verdict.minRulesMet < 1 || t.verdict.minRulesMet > ruleCount) {
		problems.push({ field: 'verdict.minRulesMet', message: `the number of rules to meet must be a whole number from 1 to ${ruleCount}` });
	}
	return problems;
}

/** The first problem of each value as a sentence, keyed by the value's path (for a form's fields and the API's details). */
export function problemsByField(problems: readonly ThresholdProblem[]): Record<string, string> {
	const fields: Record<string, string> = {};
	for (const p of problems) fields[p.field] ??= `${p.message.charAt(0).toUpperCase()}${p.message.slice(1)}.`;
	return fields;
}

/** What is wrong with a set of thresholds, in plain words; empty when they can be used. */
export function checkThresholds(t: KilonovaThresholds): string[] {
	return thresholdProblems(t).map((p) => p.message);
}

/**
 * Decide "value ≥ threshold" (above) or "value ≤ threshold" (below) with an uncertainty: met when
 * the value clears it by k·err, not met when it misses by k·err, undecided in between.
 */
function decide(value: number, err: number, threshold: number, side: 'above' | 'below', k: number): RuleStatus {
	const lo = value - k * err;
	const hi = value + k * err;
	if (side === 'above') return lo >= threshold ? 'met' : hi < threshold ? 'not met' : 'not evaluated';
	return hi <= threshold ? 'met' : lo > threshold ? 'not met' : 'not evaluated';
}

function sameThresholds(a: unknown, b: unknown): boolean {
	return JSON.stringify(a) === JSON.stringify(b);
}

function mergerMs(m: KilonovaInputs['mergerTime']): number | null {
	if (m === null || m === undefined) return null;
	const ms = typeof m === 'number' ? m : Date.parse(m);
	return Number.isFinite(ms) ? ms : null;
}

type Outcome = Pick<RuleResult, 'status' | 'reason'> & { value?: number | null; valueErr?: number | null };

const notEvaluated = (reason: string): Outcome => ({ status: 'not evaluated', reason });
const pm = (v: number, e: number, unit: string) => `${fmt(v)} ± ${fmt(e, 2)}${unit}`;

function inCredibleRegion(inputs: KilonovaInputs, t: KilonovaThresholds): Outcome {
	const c = inputs.credibleLevel;
	if (c === null || c === undefined) return notEvaluated('the candidate’s credible level in the sky map is not known');
	if (!(c >= 0 && c <= 1)) return notEvaluated(`the credible level ${c} is not a fraction between 0 and 1`);
	const level = t.credibleRegion.level;
	return {
		status: c <= level ? 'met' : 'not met',
		reason: `it lies at the ${fmt(c * 100)}% credible level, ${c <= level ? 'inside' : 'outside'} the ${fmt(level * 100)}% region`,
		value: c
	};
}

function hostDistance(inputs: KilonovaInputs, t: KilonovaThresholds): Outcome {
	const p = inputs.distancePValue;
	if (p === null || p === undefined) return notEvaluated('no host distance, or the sky map has no distance information');
	if (!(p >= 0 && p <= 1)) return notEvaluated(`the distance p-value ${p} is not between 0 and 1`);
	const min = t.hostDistance.minPValue;
	return {
		status: p >= min ? 'met' : 'not met',
		reason: `the host's distance has two-sided p = ${fmt(p)} under the merger's distance posterior (${p >= min ? 'at least' : 'below'} ${fmt(min)})`,
		value: p
	};
}

function fastFade(inputs: KilonovaInputs, t: KilonovaThresholds): Outcome {
	const merger = mergerMs(inputs.mergerTime);
	if (merger === null) return notEvaluated('the merger time is not known');
	if (!inputs.photometry?.length) return notEvaluated('no photometry');
	const f = t.fastFade;
	const wanted = new Set(f.filters.map((x) => x.toLowerCase()));
	const fits = Object.entries(summariseLightCurve(inputs.photometry, { fromMs: merger, toMs: merger + f.withinDays * MS_PER_DAY })).filter(
		([filter, s]) => wanted.has(filter.toLowerCase()) && s.rateMagPerDay !== null
	);
	if (fits.length === 0) return notEvaluated(`fewer than two detections at different times in any listed filter within ${fmt(f.withinDays)} days of the merger`);
	const decided = fits.map(([filter, s]) => ({
		filter,
		rate: s.rateMagPerDay!,
		err: s.rateErr!,
		status: decide(s.rateMagPerDay!, s.rateErr!, f.minRateMagPerDay, 'above', t.decisionSigma)
	}));
	const fastest = [...decided].sort((a, b) => b.rate - a.rate)[0];
	const list = decided.map((d) => `${d.filter} ${pm(d.rate, d.err, ' mag/day')}`).join(', ');
	const met = decided.find((d) => d.status === 'met');
	if (met) return { status: 'met', reason: `fades at ${list}`, value: met.rate, valueErr: met.err };
	if (decided.every((d) => d.status === 'not met')) return { status: 'not met', reason: `fades at only ${list}`, value: fastest.rate, valueErr: fastest.err };
	return { status: 'not evaluated', reason: `the fade rates are too uncertain to tell: ${list}`, value: fastest.rate, valueErr: fastest.err };
}

function reddening(inputs: KilonovaInputs, t: KilonovaThresholds): Outcome {
	const merger = mergerMs(inputs.mergerTime);
	if (merger === null) return notEvaluated('the merger time is not known');
	if (!inputs.photometry?.length) return notEvaluated('no photometry');
	const r = t.reddening;
	for (const [blue, red] of r.colours) {
		const c = colourEvolution(inputs.photometry, blue, red, { windowDays: r.pairWindowDays, fromMs: merger, toMs: merger + r.withinDays * MS_PER_DAY });
		if (c.rateMagPerDay === null) continue;
		const status = decide(c.rateMagPerDay, c.rateErr!, r.minRateMagPerDay, 'above', t.decisionSigma);
		const words = status === 'met' ? 'rises' : status === 'not met' ? 'does not rise fast enough' : 'changes too uncertainly to tell';
		return {
			status,
			reason: `${blue} − ${red} ${words}: ${pm(c.rateMagPerDay, c.rateErr!, ' mag/day')} from ${c.pairs.length} pairs`,
			value: c.rateMagPerDay,
			valueErr: c.rateErr
		};
	}
	return notEvaluated(`no colour measured at two different times within ${fmt(r.withinDays)} days (pairs ${r.colours.map((c) => c.join(' − ')).join(', ')})`);
}

function peakLuminosity(inputs: KilonovaInputs, t: KilonovaThresholds): Outcome {
	const d = inputs.distanceMpc;
	if (d === null || d === undefined || !(d > 0)) return notEvaluated('no distance to turn magnitudes into absolute magnitudes');
	if (!inputs.photometry?.length) return notEvaluated('no photometry');
	const p = t.peakLuminosity;
	const wanted = new Set(p.filters.map((x) => x.toLowerCase()));
	const best = brightestDetection(inputs.photometry.filter((x) => wanted.has(x.filter.toLowerCase())));
	if (!best) return notEvaluated('no detection in a listed filter');
	const m = absoluteMagnitude(best.mag!, d);
	const err = absoluteMagnitudeErr(best.magErr!, d, inputs.distanceErrMpc ?? 0);
	const k = t.decisionSigma;
	const bright = decide(m, err, p.brightestMag, 'above', k);
	const faint = decide(m, err, p.faintestMag, 'below', k);
	const status: RuleStatus = bright === 'not met' || faint === 'not met' ? 'not met' : bright === 'met' && faint === 'met' ? 'met' : 'not evaluated';
	const at = `M = ${pm(m, err, '')} (${best.filter} = ${fmt(best.mag!, 4)} at ${fmt(d)} Mpc, no K-correction)`;
	const words = status === 'met' ? 'within the range' : status === 'not met' ? (m < p.brightestMag ? 'too bright' : 'too faint') : 'too close to an edge to tell';
	return { status, reason: `${at}: ${words}`, value: m, valueErr: err };
}

const EVALUATORS: Record<RuleId, (inputs: KilonovaInputs, t: KilonovaThresholds) => Outcome> = {
	inCredibleRegion,
	hostDistance,
	fastFade,
	reddening,
	peakLuminosity
};

const LIGHT_CURVE_RULES: RuleId[] = ['fastFade', 'reddening'];

/**
 * Evaluate every rule and give a verdict:
 *  - "not kilonova-like" when any rule is not met (its reason is given);
 *  - "kilonova-like" when none fails, at least `verdict.minRulesMet` are met and (if asked) one of
 *    them is a light-curve rule (fading or reddening: position and distance alone say nothing about
 *    what the transient is);
 *  - "undecided" otherwise, saying what is missing.
 * Throws RangeError listing what is wrong with the thresholds.
 */
export function evaluateRules(inputs: KilonovaInputs, thresholds: KilonovaThresholds = DEFAULT_KILONOVA_THRESHOLDS): KilonovaAssessment {
	const problems = checkThresholds(thresholds);
	if (problems.length > 0) throw new RangeError(`the rule thresholds cannot be used: ${problems.join('; ')}`);
	const rules: RuleResult[] = (Object.keys(RULES) as RuleId[]).map((id) => {
		const def = RULES[id];
		const outcome = EVALUATORS[id](inputs, thresholds);
		const used = def.thresholds(thresholds);
		return {
			id,
			label: def.label(thresholds),
			status: outcome.status,
			reason: outcome.reason,
			value: outcome.value ?? null,
			valueErr: outcome.valueErr ?? null,
			thresholds: used,
			source: {
				...def.source,
				changedFromDefault: !sameThresholds(used, def.thresholds(DEFAULT_KILONOVA_THRESHOLDS))
			}
		};
	});
	const failed = rules.filter((r) => r.status === 'not met');
	const met = rules.filter((r) => r.status === 'met');
	const open = rules.filter((r) => r.status === 'not evaluated');
	if (failed.length > 0) {
		return { verdict: 'not kilonova-like', reasons: failed.map((r) => `${r.label}: no — ${r.reason}`), rules, thresholds };
	}
	const lightCurveMet = met.some((r) => LIGHT_CURVE_RULES.includes(r.id));
	const v = thresholds.verdict;
	if (met.length >= v.minRulesMet && (lightCurveMet || !v.needLightCurveRule)) {
		return { verdict: 'kilonova-like', reasons: met.map((r) => `${r.label}: yes — ${r.reason}`), rules, thresholds };
	}
	const reasons: string[] = [];
	if (met.length < v.minRulesMet) reasons.push(`${met.length} of ${rules.length} rules met; ${v.minRulesMet} needed and none failed`);
	if (v.needLightCurveRule && !lightCurveMet) reasons.push('no light-curve rule (fading or reddening) is met yet');
	for (const r of open) reasons.push(`${r.label}: not evaluated — ${r.reason}`);
	return { verdict: 'undecided', reasons, rules, thresholds };
}
