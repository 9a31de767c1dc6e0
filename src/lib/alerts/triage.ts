/**
 * Follow-up triage: does an event deserve telescope time under the coordinators' policy?
 * Pure: takes the policy thresholds and the event's facts, returns a verdict with one
 * human-readable reason per criterion so that the board can show why.
 *
 * Criteria (each a threshold the coordinators edit; all must pass for "follow"):
 *  - false-alarm rate at most `maxFarPerYear` events per Julian year;
 *  - probability that at least one component is a neutron star at least `minProbNS`
 *    (the HasNS property when the notice gives it, else P(BNS) + P(NSBH): both source classes
 *    contain a neutron star and the classes are exclusive, so their probabilities add);
 *  - 90% credible area at most `maxArea90Deg2`;
 *  - posterior mean distance at most `maxDistanceMpc`;
 *  - role "observation" when `requireObservationRole` (test and utility notices are drills).
 * A fact that is not known yet (a sky map that failed or carries no distance) is reported and
 * not held against the event: missing a real merger costs more than a look at a false one.
 */
import { farHzToPerYear } from './voevent.ts';

export interface TriagePolicyInput {
	maxFarPerYear: number;
	minProbNS: number;
	maxArea90Deg2: number;
	maxDistanceMpc: number;
	requireObservationRole: boolean;
}

export interface TriageFacts {
	role: 'observation' | 'test' | 'utility';
	retracted: boolean;
	farHz: number | null;
	classification: { BNS: number | null; NSBH: number | null; BBH: number | null; Terrestrial: number | null } | null;
	properties: { HasNS?: number | null } | Record<string, number | boolean | null> | null;
	area90Deg2: number | null;
	distanceMpc: number | null;
}

export interface TriageResult {
	verdict: 'follow' | 'skip';
	reasons: string[];
}

/** Defaults of the policy row (kept in step with the triage_policy table's column defaults). */
export const DEFAULT_TRIAGE_POLICY: TriagePolicyInput = {
	maxFarPerYear: 12,
	minProbNS: 0.1,
	maxArea90Deg2: 2000,
	maxDistanceMpc: 400,
	requireObservationRole: true
};

/**
 * P(NS): HasNS when present, else P(BNS) + P(NSBH) (exclusive classes, so the sum), capped at 1.
 * Null when neither is known.
 */
export function probabilityNS(facts: Pick<TriageFacts, 'classification' | 'properties'>): { value: number; source: 'HasNS' | 'BNS+NSBH' } | null {
	const hasNS = facts.properties ? (facts.properties as Record<string, unknown>).HasNS : undefined;
	if (typeof hasNS === 'number' && Number.isFinite(hasNS)) return { value: hasNS, source: 'HasNS' };
	const c = facts.classification;
	if (!c || (c.BNS === null && c.NSBH === null)) return null;
	return { value: Math.min(1, (c.BNS ?? 0) + (c.NSBH ?? 0)), source: 'BNS+NSBH' };
}

/** A number for a reason line: 2 significant digits, exponential below 0.01. */
export function formatQuantity(x: number): string {
	if (x === 0) return '0';
	const a = Math.abs(x);
	if (a < 0.01 || a >= 1e6) {
		const [mantissa, exponent] = x.toExponential(1).split('e');
		return `${mantissa}×10${superscript(Number(exponent))}`;
	}
	if (a >= 100) return String(Math.round(x));
	return String(Number(x.toPrecision(2)));
}

/** Thresholds are shown as the coordinators typed them. */
function threshold(x: number): string {
	return String(x);
}

/** Apply the policy to one event's facts. */
export function evaluateTriage(policy: TriagePolicyInput, facts: TriageFacts): TriageResult {
	const reasons: string[] = [];
	let follow = true;
	const skip = (line: string) => {
		follow = false;
		reasons.push(`${line} → skip`);
	};

	if (facts.retracted) skip('retracted by the source');

	if (policy.requireObservationRole) {
		if (facts.role === 'observation') reasons.push('role observation');
		else skip(`role ${facts.role} ≠ observation`);
	}

	if (facts.farHz === null) {
		if (!facts.retracted) skip('FAR unknown');
	} else {
		const perYear = farHzToPerYear(facts.farHz);
		if (perYear <= policy.maxFarPerYear) reasons.push(`FAR ${formatQuantity(perYear)}/yr ≤ ${threshold(policy.maxFarPerYear)}/yr`);
		else skip(`FAR ${formatQuantity(perYear)}/yr > ${threshold(policy.maxFarPerYear)}/yr`);
	}

	const pNS = probabilityNS(facts);
	const minNS = policy.minProbNS.toFixed(2);
	if (pNS === null) {
		if (!facts.retracted) skip('P(NS) unknown');
	} else if (pNS.value >= policy.minProbNS) reasons.push(`P(NS) ${pNS.value.toFixed(2)} ≥ ${minNS} (${pNS.source})`);
	else skip(`P(NS) ${pNS.value.toFixed(2)} < ${minNS} (${pNS.source})`);

	if (facts.area90Deg2 === null) reasons.push('90% area not known yet (not checked)');
	else if (facts.area90Deg2 <= policy.maxArea90Deg2)
		reasons.push(`90% area ${formatQuantity(facts.area90Deg2)} deg² ≤ ${threshold(policy.maxArea90Deg2)} deg²`);
	else skip(`90% area ${formatQuantity(facts.area90Deg2)} deg² > ${threshold(policy.maxArea90Deg2)} deg²`);

	if (facts.distanceMpc === null) reasons.push('distance not known yet (not checked)');
	else if (facts.distanceMpc <= policy.maxDistanceMpc)
		reasons.push(`distance ${formatQuantity(facts.distanceMpc)} Mpc ≤ ${threshold(policy.maxDistanceMpc)} Mpc`);
	else skip(`distance ${formatQuantity(facts.distanceMpc)} Mpc > ${threshold(policy.maxDistanceMpc)} Mpc`);

	return { verdict: follow ? 'follow' : 'skip', reasons };
}

const SUPERSCRIPT: Record<string, string> = { '-': '⁻', '0': '⁰', '1': '¹', '2': '²', '3': '³', '4': '⁴', '5': '⁵', '6': '⁶', '7': '⁷', '8': '⁸', '9': '⁹' };

function superscript(n: number): string {
	return String(n).replace(/./g, (c) => SUPERSCRIPT[c] ?? c);
}
