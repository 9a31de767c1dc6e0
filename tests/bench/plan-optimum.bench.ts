/**
 * The network plan against the optimum (`npm run bench -- plan-optimum`).
 *
 * Small invented instances (3–4 telescopes, 60–200 targets, one night; plan-instances.ts) are
 * written as a mixed-integer program (src/lib/targeting/plan-milp.ts, from the planner's own slot
 * problem) and solved exactly with HiGHS (npm `highs`, WebAssembly). Printed: the planner's
 * covered probability as a fraction of the optimum, and the same for the previous greedy
 * scheduler (`improve: false`), which is also the time reference. On the large instance
 * (7 telescopes × 2,000 targets) the LP relaxation is solved instead and gives an upper bound;
 * the planner's run time is measured several times beside the previous greedy in the same run,
 * as wall time and CPU time of this process (other work on the machine shows in the wall time).
 */
import loadHighs from 'highs';
import { planNetwork, slotProblem } from '../../src/lib/targeting/plan.ts';
import { buildBlockRelaxation, buildMilp, objectiveOf, placementsOfPlan, readSolution } from '../../src/lib/targeting/plan-milp.ts';
import type { NetworkPlan, PlanInput } from '../../src/lib/targeting/plan-types.ts';
import { LARGE, planInstance, SMALL } from './plan-instances.ts';
import { median, type BenchResult } from './run.ts';

type Highs = Awaited<ReturnType<typeof loadHighs>>;

function timed(fn: () => NetworkPlan): { plan: NetworkPlan; wallMs: number; cpuMs: number } {
	const c0 = process.cpuUsage();
	const t0 = performance.now();
	const plan = fn();
	const wallMs = performance.now() - t0;
	const c = process.cpuUsage(c0);
	return { plan, wallMs, cpuMs: (c.user + c.system) / 1000 };
}

function solve(highs: Highs, lp: string, relax: boolean): { status: string; objective: number; columns: Record<string, { Primal: number }>; ms: number } {
	const t0 = performance.now();
	const r = highs.solve(lp, { output_flag: false, time_limit: 900, mip_rel_gap: 0 });
	const ms = performance.now() - t0;
	if (r.Status !== 'Optimal') throw new Error(`HiGHS ${relax ? 'LP' : 'MILP'}: ${r.Status}`);
	return { status: r.Status, objective: r.ObjectiveValue, columns: r.Columns as Record<string, { Primal: number }>, ms };
}

export async function run(): Promise<BenchResult[]> {
	const highs = await loadHighs();
	const results: BenchResult[] = [];
	const log = (line: string) => process.stderr.write(line + '\n');
	for (const spec of SMALL) {
		const input: PlanInput = planInstance(spec);
		const previous = timed(() => planNetwork({ ...input, improve: false }));
		const improved = timed(() => planNetwork(input));
		const problem = slotProblem(input);
		const milp = buildMilp(problem);
		const exact = solve(highs, milp.lp, false);
		const optimum = objectiveOf(problem, readSolution(problem, milp, exact.columns));
		const lp = solve(highs, buildMilp(problem, { relax: true }).lp, true);
		const planned = objectiveOf(problem, placementsOfPlan(problem, improved.plan));
		if (Math.abs(planned - improved.plan.coveredProbability) > 1e-12) throw new Error(`${spec.label}: objective ${planned} ≠ covered ${improved.plan.coveredProbability}`);
		if (Math.abs(optimum - exact.objective) > 1e-9) throw new Error(`${spec.label}: HiGHS objective ${exact.objective} ≠ placements ${optimum}`);
		const ratio = improved.plan.coveredProbability / optimum;
		const ratioPrevious = previous.plan.coveredProbability / optimum;
		log(
			`${spec.label.padEnd(30)} optimum ${optimum.toFixed(6)}  LP ${lp.objective.toFixed(6)}  planner ${ratio.toFixed(4)}  previous greedy ${ratioPrevious.toFixed(4)}  ` +
				`(${milp.variables} variables, ${milp.constraints} rows; MILP ${exact.ms.toFixed(0)} ms, LP ${lp.ms.toFixed(0)} ms)`
		);
		results.push({
			suite: 'plan optimum',
			name: `${spec.label}: planner / MILP optimum = ${ratio.toFixed(4)}`,
			strainlineMs: improved.wallMs,
			referenceMs: previous.wallMs,
			reference: `previous greedy (${ratioPrevious.toFixed(4)} of the optimum)`,
			note: `optimum ${optimum.toFixed(6)} by HiGHS in ${exact.ms.toFixed(0)} ms`
		});
	}

	// Large: LP-relaxation bound and run time.
	const input = planInstance(LARGE);
	planNetwork(input);
	planNetwork({ ...input, improve: false });
	const improvedRuns: ReturnType<typeof timed>[] = [];
	const previousRuns: ReturnType<typeof timed>[] = [];
	for (let k = 0; k < 5; k++) {
		previousRuns.push(timed(() => planNetwork({ ...input, improve: false })));
		improvedRuns.push(timed(() => planNetwork(input)));
	}
	const improved = improvedRuns[0].plan;
	const previous = previousRuns[0].plan;
	const fmt = (runs: ReturnType<typeof timed>[], key: 'wallMs' | 'cpuMs') => runs.map((r) => r[key].toFixed(0)).join('/');
	log(
		`${LARGE.label.padEnd(30)} planner wall ${fmt(improvedRuns, 'wallMs')} ms, CPU ${fmt(improvedRuns, 'cpuMs')} ms; previous greedy wall ${fmt(previousRuns, 'wallMs')} ms, CPU ${fmt(previousRuns, 'cpuMs')} ms`
	);
	const problem = slotProblem(input);
	const planned = objectiveOf(problem, placementsOfPlan(problem, improved));
	if (Math.abs(planned - improved.coveredProbability) > 1e-12) throw new Error(`large: objective ${planned} ≠ covered ${improved.coveredProbability}`);
	// The full LP relaxation (~460k columns) does not finish within 15 min here; the relaxation with
	// slots grouped in blocks of BLOCK (plan-milp.ts buildBlockRelaxation) is a looser upper bound.
	const BLOCK = 4;
	const relaxed = buildBlockRelaxation(problem, BLOCK);
	const lp = solve(highs, relaxed.lp, true);
	log(
		`${LARGE.label.padEnd(30)} LP bound (blocks of ${BLOCK} slots) ${lp.objective.toFixed(6)}  planner ${(improved.coveredProbability / lp.objective).toFixed(4)}  previous greedy ${(previous.coveredProbability / lp.objective).toFixed(4)}  ` +
			`(${relaxed.variables} variables, ${relaxed.constraints} rows; LP ${(lp.ms / 1000).toFixed(1)} s)`
	);
	results.push({
		suite: 'plan optimum',
		name: `${LARGE.label}: planner / block-LP bound = ${(improved.coveredProbability / lp.objective).toFixed(4)}`,
		strainlineMs: median(improvedRuns.map((r) => r.wallMs)),
		referenceMs: median(previousRuns.map((r) => r.wallMs)),
		reference: `previous greedy (${(previous.coveredProbability / lp.objective).toFixed(4)} of the bound)`,
		note: `median CPU ${median(improvedRuns.map((r) => r.cpuMs)).toFixed(0)} ms vs ${median(previousRuns.map((r) => r.cpuMs)).toFixed(0)} ms`
	});
	return results;
}
