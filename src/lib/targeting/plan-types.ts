/**
 * What the network plan takes and gives (plan.ts computes it; plan-export.ts writes observing
 * lists from it). Plain data; times are ISO-8601 UTC strings in the output.
 */
import type { Site } from './observing-inputs.ts';
import type { TelescopeLimits, TelescopeOptics } from './telescope.ts';

export type PlanTargetKind = 'galaxy' | 'field';

/** One requested observation of a target. Omitted filter: the telescope's default filter. */
export interface PlanVisit {
	filter?: string;
	/** Epochs are ordered: epoch n waits until every lower epoch of the target has ended ≥ minEpochGapS earlier. */
	epoch?: number;
}

export interface PlanTarget {
	id: string;
	kind: PlanTargetKind;
	raDeg: number;
	decDeg: number;
	/** Probability the target holds (galaxy: its share of the ranked candidates; field: enclosed probability). */
	probability: number;
	/** Field targets: the telescope id(s) whose field of view made the tiling. Absent: any telescope. */
	fieldFor?: string | readonly string[];
	name?: string;
	/** Absent: one visit in the telescope's default filter. */
	visits?: readonly PlanVisit[];
}

/** A telescope as stored in the `telescope` table (same field names). */
export interface PlanTelescope extends Site, TelescopeOptics, TelescopeLimits {
	id: string;
	name: string;
	filters: readonly string[];
	limitingMag: number;
	limitingMagExposureS: number;
	slewOverheadS: number;
}
/**
 * A live claim: telescope `telescopeId` has taken this target (in this filter / epoch; absent =
 * any). A claimed visit is never planned for another telescope; it stays in the claimant's
 * plan, scheduled like any other visit (and the kind/field-of-view rule is waived for it).
 */
export interface PlanClaim {
	targetId: string;
	filter?: string | null;
	epoch?: number | null;
	telescopeId: string;
}

export interface PlanInput {
	targets: readonly PlanTarget[];
	telescopes: readonly PlanTelescope[];
	claims?: readonly PlanClaim[];
	start: Date;
	/** Length of the plan, hours (default 24). */
	horizonH?: number;
	/** Waiting step when nothing is observable, and the grid for darkness and drop reasons, s (default 300). */
	stepS?: number;
	/** Exposure per telescope (number: all telescopes), s. Default: the telescope's limitingMagExposureS. */
	exposureS?: number | Readonly<Record<string, number>>;
	/** Filter for visits that name none, per telescope id. Default: the telescope's first filter. */
	defaultFilter?: Readonly<Record<string, string>>;
	/** 'astronomical' (Sun ≤ −18°, default) or 'nautical' (Sun ≤ −12°). */
	darkness?: 'astronomical' | 'nautical';
	/** Let wide-field telescopes take galaxies too (default false). */
	galaxiesOnWideField?: boolean;
	/** A telescope with a field of view at least this large is wide-field (default 1 deg²). */
	wideFieldMinAreaDeg2?: number;
	/** 'last-chance' (default) or 'none' (pure highest-probability-first). */
	urgency?: 'last-chance' | 'none';
	/** A last-chance visit needs at least this fraction of the best visit's probability (default 0.5). */
	lastChanceRatio?: number;
	/** Priority multiplier for visits of a target that is already covered (default 1: same priority). */
	repeatPriority?: number;
	/** Minimum time from the end of one epoch of a target to the start of the next, s (default 3600). */
	minEpochGapS?: number;
	/**
	 * Search for the plan of largest covered probability on the slot grid after the greedy pass
	 * (docs/plan.md, "Improvement"). Default true, except with urgency 'none' (pure
	 * highest-probability-first, kept as it was).
	 */
	improve?: boolean;
}

export interface PlanAssignment {
	/** 1-based position in the telescope's list. */
	order: number;
	telescopeId: string;
	targetId: string;
	kind: PlanTargetKind;
	name: string | null;
	raDeg: number;
	decDeg: number;
	/** Exposure start and end, ISO-8601 UTC. The slew takes the slewOverheadS before `start`. */
	start: string;
	end: string;
	exposureS: number;
	filter: string | null;
	epoch: number | null;
	/** Geometric altitude at the exposure's start and end. */
	altitudeDeg: number;
	altitudeEndDeg: number;
	/** Airmass at the exposure's start (Kasten & Young 1989) and the worst of start/middle/end. */
	airmass: number;
	maxAirmass: number;
	/** Smallest Moon distance over start/middle/end (topocentric). */
	moonSepDeg: number;
	/** Solar elongation at the start (geocentric). */
	sunSepDeg: number;
	sunAltitudeDeg: number;
	probability: number;
	/** Probability this exposure adds to the network's coverage (0 for a repeat visit). */
	newProbability: number;
	/** Running sum of newProbability over this telescope's list. */
	cumulativeProbability: number;
	/** Chosen ahead of a more probable visit because it would be gone in the next slot. */
	lastChance: boolean;
}

export interface CoveragePoint {
	/** Hours since the plan's start. */
	timeH: number;
	time: string;
	probability: number;
}

export interface DarkInterval {
	start: string;
	end: string;
}

export interface TelescopePlan {
	telescopeId: string;
	name: string;
	exposureS: number;
	slewOverheadS: number;
	defaultFilter: string | null;
	darkness: DarkInterval[];
	assignments: PlanAssignment[];
	/** Step curve of the probability this telescope added first (network-wide first coverage). */
	coverage: CoveragePoint[];
}

export type DropReason =
	| 'claimed'
	| 'no-telescope'
	| 'sun'
	| 'no-darkness'
	| 'below-altitude'
	| 'airmass'
	| 'moon'
	| 'epoch-order'
	| 'no-time';

export interface DroppedVisit {
	targetId: string;
	filter: string | null;
	epoch: number | null;
	probability: number;
	reason: DropReason;
	detail: string;
}

export interface NetworkPlan {
	start: string;
	end: string;
	horizonH: number;
	stepS: number;
	sunAltitudeLimitDeg: number;
	telescopes: TelescopePlan[];
	dropped: DroppedVisit[];
	/** Step curve: probability of the distinct targets whose first exposure has ended, vs time. */
	coverage: CoveragePoint[];
	/** Sum of the probabilities of the distinct targets planned. */
	coveredProbability: number;
	/** Sum of the probabilities of all distinct targets given. */
	offeredProbability: number;
}
