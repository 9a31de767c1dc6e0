/**
 * Words for the work on a candidate after its report: what a spectrum says it is, how sure the
 * classifier is, and why a candidate was set aside or promoted. Shared by the server (stored
 * values, checks) and pages (labels). Pure.
 *
 * Classification labels are terms of the trade; stored as short stable keys, shown by LABEL_NAMES.
 * Confidence is a word, not a number: a spectroscopist's judgement is not a calibrated probability,
 * and three steps are what people can tell apart when they write it down (our choice).
 */

export const CLASSIFICATION_LABELS = [
	'kilonova',
	'sn-ia',
	'sn-ii',
	'sn-ibc',
	'agn',
	'stellar-flare',
	'cv',
	'asteroid',
	'artefact',
	'unrelated',
	'unknown'
] as const;
export type ClassificationLabel = (typeof CLASSIFICATION_LABELS)[number];

export const LABEL_NAMES: Record<ClassificationLabel, string> = {
	kilonova: 'kilonova',
	'sn-ia': 'type Ia supernova',
	'sn-ii': 'type II supernova',
	'sn-ibc': 'type Ib/c supernova',
	agn: 'AGN or nuclear transient',
	'stellar-flare': 'stellar flare',
	cv: 'cataclysmic variable',
	asteroid: 'asteroid',
	artefact: 'artefact',
	unrelated: 'unrelated transient',
	unknown: 'unknown'
};

export const CONFIDENCE_LEVELS = ['low', 'medium', 'high'] as const;
export type Confidence = (typeof CONFIDENCE_LEVELS)[number];

/** Where a candidate stands in the search: still open, set aside with a reason, or promoted for a spectrum. */
export const CANDIDATE_STATES = ['open', 'rejected', 'promoted'] as const;
export type CandidateState = (typeof CANDIDATE_STATES)[number];

export const REJECTION_REASONS = ['asteroid', 'known-variable', 'artefact', 'unrelated'] as const;
export type RejectionReason = (typeof REJECTION_REASONS)[number];

export const REJECTION_NAMES: Record<RejectionReason, string> = {
	asteroid: 'a moving object (asteroid)',
	'known-variable': 'a known variable source',
	artefact: 'an image artefact',
	unrelated: 'a transient unrelated to the merger'
};

/** Stored in the candidate's `classification` column when current classifications disagree. */
export const DISPUTED = 'disputed';

export interface ClassificationOpinion {
	label: ClassificationLabel;
	confidence: Confidence;
	authorId: string;
	authorName: string;
	/** ISO 8601 or ms since 1970: later opinions of one author replace earlier ones. */
	createdAt: string | number;
}

export interface ClassificationSummary {
	/** 'none', one label agreed by every current opinion, or a disagreement. */
	status: 'none' | 'agreed' | 'disputed';
	/** The agreed label; null when none or disputed. */
	label: ClassificationLabel | null;
	/** Each author's latest opinion, newest first. */
	current: ClassificationOpinion[];
	/** One sentence for people, e.g. "2 classifications disagree: kilonova (high), type Ia supernova (medium)". */
	text: string;
}

const timeOf = (t: string | number) => (typeof t === 'number' ? t : Date.parse(t));

/**
 * What the classifications of one candidate say together. Each author's latest opinion counts
 * (a person who changes their mind replaces their own earlier one); others stand side by side.
 * Agreement means every current opinion has the same label; anything else is a disagreement, named
 * label by label with the strongest confidence each label received.
 */
export function summariseClassifications(opinions: readonly ClassificationOpinion[]): ClassificationSummary {
	const latest = new Map<string, ClassificationOpinion>();
	for (const o of opinions) {
		const seen = latest.get(o.authorId);
		if (!seen || timeOf(o.createdAt) >= timeOf(seen.createdAt)) latest.set(o.authorId, o);
	}
	const current = [...latest.values()].sort((a, b) => timeOf(b.createdAt) - timeOf(a.createdAt));
	if (current.length === 0) return { status: 'none', label: null, current, text: 'Not classified yet.' };
	const rank = (c: Confidence) => CONFIDENCE_LEVELS.indexOf(c);
	const byLabel = new Map<ClassificationLabel, Confidence>();
	for (const o of current) {
		const had = byLabel.get(o.label);
		if (had === undefined || rank(o.confidence) > rank(had)) byLabel.set(o.label, o.confidence);
	}
	const named = [...byLabel.entries()]
		.sort((a, b) => rank(b[1]) - rank(a[1]) || a[0].localeCompare(b[0]))
		.map(([label, confidence]) => `${LABEL_NAMES[label]} (${confidence})`);
	if (byLabel.size === 1) {
		const label = current[0].label;
		const who = current.length === 1 ? `by ${current[0].authorName}` : `by all ${current.length} classifiers`;
		return { status: 'agreed', label, current, text: `Classified as ${named[0]} ${who}.` };
	}
	return { status: 'disputed', label: null, current, text: `${current.length} classifications disagree: ${named.join(', ')}.` };
}
