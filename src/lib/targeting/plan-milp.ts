/**
 * The network plan's problem on the slot grid as a mixed-integer program, written in CPLEX LP
 * format (as read by HiGHS and most solvers), and the solution read back. Used to measure how far
 * the planner is from the best plan (tests/bench/plan-optimum.bench.ts, plan-milp.spec.ts).
 *
 * The problem is `slotProblem(input)` from plan.ts: the planner's own slot grid, eligibility
 * (kind, field of view, filter, claims) and observability (darkness, altitude, airmass, Sun and
 * Moon distance at the exposure's start, middle and end), so both solve the same problem.
 *
 *   variables  x[v,k,j] ∈ {0,1}  visit v in slot j of telescope k (only where allowed and observable)
 *              z[t] ∈ [0,1]      target t is covered
 *   maximise   Σ_t p_t z[t]
 *   subject to Σ_v x[v,k,j] ≤ 1                      each slot holds one exposure
 *              Σ_{k,j} x[v,k,j] ≤ 1                  each visit at most once in the network
 *              z[t] − Σ_{v of t} Σ_{k,j} x[v,k,j] ≤ 0  a target counts when one of its visits is made
 *              x[v,k,j] − Σ_{(k',j') : end(k',j') + gap ≤ start(k,j)} x[u,k',j'] ≤ 0
 *                                                    for every lower epoch u of v's target
 * Slots of one telescope never overlap (they are a slew + exposure apart), so "one exposure per
 * slot" is the whole of the no-overlap rule. The LP relaxation replaces x ∈ {0,1} by 0 ≤ x ≤ 1.
 *
 * Pure: strings and plain data; the caller runs the solver.
 */
import type { NetworkPlan } from './plan-types.ts';
import type { SlotProblem } from './plan.ts';

export interface Milp {
	/** The model in CPLEX LP format. */
	lp: string;
	/** Column name per visit option: names[v][i] for problem.visits[v].options[i]. */
	names: string[][];
	variables: number;
	constraints: number;
}

const xName = (v: number, k: number, j: number) => `x${v}_${k}_${j}`;
const zName = (t: number) => `z${t}`;

function terms(list: string[]): string {
	const lines: string[] = [];
	for (let i = 0; i < list.length; i += 8) lines.push(list.slice(i, i + 8).join(' '));
	return lines.join('\n   ');
}

/** Builds the program; `relax: true` gives the LP relaxation (x continuous in [0, 1]). */
export function buildMilp(problem: SlotProblem, options: { relax?: boolean } = {}): Milp {
	const names = problem.visits.map((v, vi) => v.options.map((o) => xName(vi, o.telescope, o.slot)));
	const rows: string[] = [];
	const objective: string[] = [];
	const zs: string[] = [];
	const byTarget = new Map<number, number[]>();
	problem.visits.forEach((v, vi) => {
		const list = byTarget.get(v.targetIndex) ?? [];
		list.push(vi);
		byTarget.set(v.targetIndex, list);
	});
	problem.targets.forEach((t, ti) => {
		const vs = byTarget.get(ti) ?? [];
		const xs = vs.flatMap((vi) => names[vi]);
		if (!(t.probability > 0) || xs.length === 0) return;
		objective.push(`${objective.length ? '+ ' : ''}${t.probability} ${zName(ti)}`);
		zs.push(zName(ti));
		rows.push(` c${ti}: ${terms([zName(ti), ...xs.map((x) => `- ${x}`)])} <= 0`);
	});
	const perSlot = new Map<string, string[]>();
	problem.visits.forEach((v, vi) => {
		v.options.forEach((o, i) => {
			const key = `${o.telescope}_${o.slot}`;
			const list = perSlot.get(key) ?? [];
			list.push(names[vi][i]);
			perSlot.set(key, list);
		});
		if (v.options.length > 1) rows.push(` v${vi}: ${terms(names[vi].map((x, i) => (i ? `+ ${x}` : x)))} <= 1`);
	});
	for (const [key, xs] of perSlot) if (xs.length > 1) rows.push(` s${key}: ${terms(xs.map((x, i) => (i ? `+ ${x}` : x)))} <= 1`);
	// Epoch order.
	const startOf = (o: { telescope: number; slot: number }) => problem.telescopes[o.telescope].starts[o.slot];
	const endOf = (o: { telescope: number; slot: number }) => startOf(o) + problem.telescopes[o.telescope].exposureMs;
	problem.visits.forEach((v, vi) => {
		if (v.epoch === null) return;
		for (const ui of byTarget.get(v.targetIndex) ?? []) {
			const u = problem.visits[ui];
			if (u.epoch === null || u.epoch >= v.epoch) continue;
			v.options.forEach((o, i) => {
				const before = u.options.flatMap((w, wi) => (endOf(w) + problem.minEpochGapMs <= startOf(o) ? [`- ${names[ui][wi]}`] : []));
				rows.push(` e${vi}_${ui}_${i}: ${terms([names[vi][i], ...before])} <= 0`);
			});
		}
	});
	const xs = names.flat();
	const lp = [
		'Maximize',
		` obj: ${objective.length ? terms(objective) : '0 dummy'}`,
		'Subject To',
		...(rows.length ? rows : [' none: dummy <= 0']),
		'Bounds',
		...zs.map((z) => ` 0 <= ${z} <= 1`),
		...(options.relax ? xs.map((x) => ` 0 <= ${x} <= 1`) : []),
		...(!options.relax && xs.length ? ['Binary', ` ${terms(xs)}`] : []),
		'End',
		''
	].join('\n');
	return { lp, names, variables: xs.length + zs.length, constraints: rows.length };
}

/**
 * A smaller relaxation for large instances: each telescope's slots are grouped into blocks of
 * `blockSlots` consecutive slots; y[v,k,b] ∈ [0,1] is visit v in block b of telescope k, allowed
 * when v is observable in some slot of the block; a block holds as many exposures as it has slots.
 * Epoch rows are left out. Every plan on the slot grid is a solution of it (put each exposure in
 * its slot's block), so its LP optimum bounds the program's optimum from above.
 */
export function buildBlockRelaxation(problem: SlotProblem, blockSlots: number): Milp {
	const rows: string[] = [];
	const objective: string[] = [];
	const zs: string[] = [];
	const ys = new Set<string>();
	const perBlock = new Map<string, Set<string>>();
	const perVisit: string[][] = problem.visits.map(() => []);
	problem.visits.forEach((v, vi) => {
		const seen = new Set<string>();
		for (const o of v.options) {
			const b = Math.floor(o.slot / blockSlots);
			const name = `y${vi}_${o.telescope}_${b}`;
			if (seen.has(name)) continue;
			seen.add(name);
			ys.add(name);
			perVisit[vi].push(name);
			const key = `${o.telescope}_${b}`;
			const set = perBlock.get(key) ?? new Set<string>();
			set.add(name);
			perBlock.set(key, set);
		}
	});
	const byTarget = new Map<number, number[]>();
	problem.visits.forEach((v, vi) => byTarget.set(v.targetIndex, [...(byTarget.get(v.targetIndex) ?? []), vi]));
	problem.targets.forEach((t, ti) => {
		const list = (byTarget.get(ti) ?? []).flatMap((vi) => perVisit[vi]);
		if (!(t.probability > 0) || list.length === 0) return;
		objective.push(`${objective.length ? '+ ' : ''}${t.probability} ${zName(ti)}`);
		zs.push(zName(ti));
		rows.push(` c${ti}: ${terms([zName(ti), ...list.map((y) => `- ${y}`)])} <= 0`);
	});
	perVisit.forEach((list, vi) => {
		if (list.length > 1) rows.push(` v${vi}: ${terms(list.map((y, i) => (i ? `+ ${y}` : y)))} <= 1`);
	});
	for (const [key, set] of perBlock) {
		const [k, b] = key.split('_').map(Number);
		const capacity = Math.min(blockSlots, problem.telescopes[k].starts.length - b * blockSlots);
		if (set.size > capacity) rows.push(` s${key}: ${terms([...set].map((y, i) => (i ? `+ ${y}` : y)))} <= ${capacity}`);
	}
	const lp = [
		'Maximize',
		` obj: ${objective.length ? terms(objective) : '0 dummy'}`,
		'Subject To',
		...(rows.length ? rows : [' none: dummy <= 0']),
		'Bounds',
		...zs.map((z) => ` 0 <= ${z} <= 1`),
		...[...ys].map((y) => ` 0 <= ${y} <= 1`),
		'End',
		''
	].join('\n');
	return { lp, names: [], variables: ys.size + zs.length, constraints: rows.length };
}

export interface Placement {
	visit: number;
	telescope: number;
	slot: number;
}

/** The visits placed by a solution (columns as the solver returns them: name → { Primal }). */
export function readSolution(problem: SlotProblem, milp: Milp, columns: Readonly<Record<string, { Primal: number }>>): Placement[] {
	const out: Placement[] = [];
	problem.visits.forEach((v, vi) =>
		v.options.forEach((o, i) => {
			if ((columns[milp.names[vi][i]]?.Primal ?? 0) > 0.5) out.push({ visit: vi, telescope: o.telescope, slot: o.slot });
		})
	);
	return out;
}

/**
 * The objective Σ p_t z[t] of integral placements, after checking every constraint of the
 * program; throws naming the first one broken.
 */
export function objectiveOf(problem: SlotProblem, placements: readonly Placement[]): number {
	const slotUsed = new Set<string>();
	const visitUsed = new Set<number>();
	const endOfVisit = new Map<number, number>();
	for (const p of placements) {
		const v = problem.visits[p.visit];
		if (!v || !v.options.some((o) => o.telescope === p.telescope && o.slot === p.slot)) {
			throw new Error(`visit ${p.visit} is not allowed or not observable in slot ${p.slot} of telescope ${p.telescope}`);
		}
		const key = `${p.telescope}_${p.slot}`;
		if (slotUsed.has(key)) throw new Error(`slot ${p.slot} of telescope ${p.telescope} holds two exposures`);
		slotUsed.add(key);
		if (visitUsed.has(p.visit)) throw new Error(`visit ${p.visit} is made twice`);
		visitUsed.add(p.visit);
		const tel = problem.telescopes[p.telescope];
		endOfVisit.set(p.visit, tel.starts[p.slot] + tel.exposureMs);
	}
	for (const p of placements) {
		const v = problem.visits[p.visit];
		const epoch = v.epoch;
		if (epoch === null) continue;
		const start = problem.telescopes[p.telescope].starts[p.slot];
		problem.visits.forEach((u, ui) => {
			if (u.targetIndex !== v.targetIndex || u.epoch === null || u.epoch >= epoch) return;
			const end = endOfVisit.get(ui);
			if (end === undefined || end + problem.minEpochGapMs > start) throw new Error(`visit ${p.visit} comes too soon after epoch ${u.epoch}`);
		});
	}
	const coveredTargets = new Set(placements.map((p) => problem.visits[p.visit].targetIndex));
	let sum = 0;
	for (const t of coveredTargets) sum += Math.max(0, problem.targets[t].probability);
	return sum;
}

/** A network plan's exposures as placements of the program (throws if one is not a slot option). */
export function placementsOfPlan(problem: SlotProblem, plan: NetworkPlan): Placement[] {
	const targetIndex = new Map(problem.targets.map((t, i) => [t.id, i]));
	return plan.telescopes.flatMap((tp) => {
		const k = problem.telescopes.findIndex((t) => t.id === tp.telescopeId);
		if (k < 0) throw new Error(`telescope ${tp.telescopeId} is not in the problem`);
		// Output times are whole milliseconds; the grid may carry fractions.
		const slotAt = new Map(problem.telescopes[k].starts.map((s, j) => [Math.trunc(s), j]));
		return tp.assignments.map((a) => {
			const slot = slotAt.get(Date.parse(a.start));
			if (slot === undefined) throw new Error(`${tp.telescopeId} ${a.targetId} at ${a.start} is off the slot grid`);
			const t = targetIndex.get(a.targetId);
			const fits = (filter: string | null) => (v: SlotProblem['visits'][number]) =>
				v.targetIndex === t && v.epoch === a.epoch && v.filter === filter && v.options.some((o) => o.telescope === k && o.slot === slot);
			let visit = problem.visits.findIndex(fits(a.filter));
			if (visit < 0) visit = problem.visits.findIndex(fits(null));
			if (visit < 0) throw new Error(`${tp.telescopeId} ${a.targetId} at ${a.start} matches no visit option`);
			return { visit, telescope: k, slot };
		});
	});
}
