/**
 * Positions for observing: the night of a site, a target's window in it, the network plan and the
 * "observable now" filter of the targets page, on the demo network (seeds/scenario.ts, invented).
 * No outside reference is timed here: the positions are checked against astropy/astroplan in the
 * unit tests (tests/fixtures/night). Each case's note carries a digest of its output, so two runs
 * of different code can be compared for identical results as well as for time.
 */
import { mulberry32 } from '../../fake-alert-broker/prng.ts';
import { DEMO_TELESCOPES } from '../../seeds/scenario.ts';
import { nightWindow, observableWindow } from '../../src/lib/targeting/night.ts';
import { planNetwork } from '../../src/lib/targeting/plan.ts';
import type { PlanTarget, PlanTelescope } from '../../src/lib/targeting/plan-types.ts';
import { observableNowMask, skyNow, tonight } from '../../src/lib/targeting/visibility.ts';
import { median, timeRuns, type BenchResult } from './run.ts';

const REPEATS = 5;
const WARMUP = 1;
const time = (fn: () => void, repeats = REPEATS) => timeRuns(fn, repeats, WARMUP);

const START = new Date('2026-12-02T18:00:00Z');
const telescopes: PlanTelescope[] = DEMO_TELESCOPES.map((t, i) => ({ ...t, id: `s${i}` }));

function skyTargets(count: number, seed: number): { raDeg: Float64Array; decDeg: Float64Array } {
	const rnd = mulberry32(seed);
	const raDeg = new Float64Array(count);
	const decDeg = new Float64Array(count);
	for (let k = 0; k < count; k++) {
		raDeg[k] = rnd() * 360;
		decDeg[k] = (Math.asin(2 * rnd() - 1) * 180) / Math.PI;
	}
	return { raDeg, decDeg };
}

/** Short digest of numbers, so that runs of two versions of the code can be compared. */
function digest(values: number[]): string {
	let h = 0;
	for (const v of values) {
		const s = v.toPrecision(12);
		for (let i = 0; i < s.length; i++) h = (Math.imul(h, 31) + s.charCodeAt(i)) | 0;
	}
	return (h >>> 0).toString(16).padStart(8, '0');
}

export async function run(): Promise<BenchResult[]> {
	const results: BenchResult[] = [];
	const site = telescopes[0];

	// Night windows: 30 consecutive nights at one site (Sun crossings by root search, Moon).
	let nights: ReturnType<typeof nightWindow>[] = [];
	const nightMs = time(() => {
		nights = [];
		for (let d = 0; d < 30; d++) nights.push(nightWindow(site, new Date(Date.UTC(2026, 11, 2 + d)).toISOString().slice(0, 10)));
	}, 3);
	results.push({
		suite: 'night',
		name: 'night windows, 30 nights at one site',
		strainlineMs: median(nightMs),
		note: `digest ${digest(nights.flatMap((n) => [Date.parse(n.darkness?.start ?? '0'), Date.parse(n.sunset.evening ?? '0'), n.moon.altitudeDeg]))}`
	});

	// Observable windows: 200 targets in one night (altitude evaluations by bisection).
	const night = nights[0];
	const few = skyTargets(200, 11);
	let hours: number[] = [];
	const windowMs = time(() => {
		hours = [];
		for (let k = 0; k < few.raDeg.length; k++) hours.push(observableWindow(site, { raDeg: few.raDeg[k], decDeg: few.decDeg[k] }, night, 30).totalHours);
	});
	results.push({ suite: 'night', name: 'observable windows, 200 targets, one night', strainlineMs: median(windowMs), note: `digest ${digest(hours)}` });

	// "Observable now" over 10⁵ directions (the vectorised form), at a dark instant of that night.
	const many = skyTargets(100_000, 12);
	const now = new Date(Date.parse(night.darkness!.start) + 2 * 3_600_000);
	const t = { ...site, minAltitudeDeg: 30 };
	let mask: Uint8Array = new Uint8Array(0);
	const maskMs = time(() => {
		mask = observableNowMask(skyNow(t, tonight(site, now), now), many.raDeg, many.decDeg);
	});
	results.push({
		suite: 'night',
		name: 'observable-now mask, 10⁵ directions (with tonight)',
		strainlineMs: median(maskMs),
		note: `${mask.reduce((s, x) => s + x, 0)} observable, digest ${digest(Array.from(mask))}`
	});

	// The network plan: 300 galaxies and 200 fields per wide-field telescope, 7 telescopes, 24 h.
	const rnd = mulberry32(13);
	const targets: PlanTarget[] = [];
	for (let k = 0; k < 300; k++) targets.push({ id: `G${k}`, kind: 'galaxy', raDeg: 40 + rnd() * 40, decDeg: -40 + rnd() * 40, probability: rnd() / 300 });
	for (const tel of telescopes.filter((x) => x.fovWidthDeg * x.fovHeightDeg >= 1)) {
		for (let k = 0; k < 200; k++) targets.push({ id: `${tel.id}:F${k}`, kind: 'field', raDeg: 40 + rnd() * 40, decDeg: -40 + rnd() * 40, probability: rnd() / 200, fieldFor: tel.id });
	}
	let plan: ReturnType<typeof planNetwork> | null = null;
	const planMs = time(() => {
		plan = planNetwork({ targets, telescopes, start: START, horizonH: 24 });
	}, 3);
	const p = plan as unknown as ReturnType<typeof planNetwork>;
	const assignments = p.telescopes.flatMap((x) => x.assignments);
	results.push({
		suite: 'plan',
		name: `network plan, ${targets.length} targets, ${telescopes.length} telescopes, 24 h`,
		strainlineMs: median(planMs),
		note: `${assignments.length} exposures, covered ${p.coveredProbability.toFixed(6)}, digest ${digest(assignments.flatMap((a) => [Date.parse(a.start), a.altitudeDeg, a.moonSepDeg]))}`
	});
	return results;
}
