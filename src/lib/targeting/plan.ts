/**
 * The network plan: which telescope observes which ranked galaxy or sky field, and when, so that
 * the probability covered grows as fast as possible over the next hours.
 *
 * Pure: plain data in, plain data out; no clock, no I/O. Recompute it whenever the sky map,
 * the ranked targets or the live claims change — it is deterministic for the same input.
 *
 * Algorithm (a greedy list scheduler, then, with `improve` (default), the best covered probability
 * on the slot grid; see docs/plan.md):
 *  1. Every target expands to visits (one per requested filter/epoch; one visit by default).
 *     A visit is done at most once by the whole network.
 *  2. Each telescope has a free time, initially `start`. Repeatedly the telescope that is free
 *     earliest decides: its next exposure would start after the slew (`start = free + slew`) and
 *     last `exposureS`. Among the visits it may take, those observable at the exposure's start,
 *     middle and end (Sun ≤ the darkness limit at the site, geometric altitude ≥ minAltitudeDeg,
 *     airmass ≤ maxAirmass, solar elongation ≥ minSunSeparationDeg, Moon distance ≥
 *     minMoonSeparationDeg) compete; the most probable wins, except that a "last-chance"
 *     visit — observable now but no longer in the telescope's next slot — with at least
 *     `lastChanceRatio` of the winner's probability goes first when the winner will still be
 *     observable in the next slot (swapping the two then only delays the winner by one slot).
 *  3. When nothing is observable the telescope waits one `stepS`; outside darkness it jumps to
 *     the next darkness (found on the `stepS` grid and refined by bisection to 1 s).
 *  4. With `improve`: steps 2-3 run on each telescope's slot grid (a wait is one slot), then the
 *     largest covered probability on the grids is computed exactly (a vertex-weighted bipartite
 *     matching, plan-matching.ts); if it beats the greedy plan, its plan is used, with the free
 *     slots filled by the remaining visits. plan-milp.ts writes the same problem as a
 *     mixed-integer program for an outside solver to check.
 * Sampling three instants per exposure is exact for altitude and the Sun's altitude away from
 * culminations (both are monotonic between culminations), and near enough elsewhere for
 * exposures of minutes.
 *
 * Positions: the tabulated form of the astronomy core (apparent-place.ts `ephemerisTables`,
 * `siteEphemeris`, `instantAt`): the same method as `targetAltAz`, `sunPosition`,
 * `moonSeparationDeg` and `sunSeparationDeg`, with the slowly varying parts interpolated from
 * 10-min tables. The constraints and their safety margins are in plan-constraints.ts; input and
 * output types in plan-types.ts.
 */
import { airmassKastenYoung1989, ephemerisTables, instantAt, siteEphemeris, standardRefractionDeg, type ApparentInstant, type SiteEphemeris } from './apparent-place.ts';
import { ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG, NAUTICAL_TWILIGHT_ALTITUDE_DEG } from './night.ts';
import { validateSite, validateTarget } from './observing-inputs.ts';
import { AIRMASS_MARGIN, darkIntervals, MARGIN_DEG, sampleAt, Stage, sunElongationDeg, type Limits, type Sample } from './plan-constraints.ts';
import type {
	CoveragePoint,
	DropReason,
	DroppedVisit,
	NetworkPlan,
	PlanAssignment,
	PlanClaim,
	PlanInput,
	PlanTarget,
	PlanTelescope
} from './plan-types.ts';
import { maxWeightCover } from './plan-matching.ts';
import { unitVector, type Vec3 } from './sky-geometry.ts';
import { fovAreaDeg2, WIDE_FIELD_MIN_DEG2 } from './telescope.ts';

// ---------------------------------------------------------------------------------------------
// Planning

interface VisitState {
	index: number;
	target: PlanTarget;
	targetIndex: number;
	filter: string | null;
	epoch: number | null;
	/** Telescope indices allowed by live claims; null when unclaimed. */
	reservedFor: Set<number> | null;
	claimedBy: string[];
	/** Per telescope: the filter it would use, or null when it may not take the visit. */
	filterFor: (string | null)[];
	ineligibleWhy: string[];
	assigned: PlanAssignment | null;
}

interface TelescopeState {
	index: number;
	telescope: PlanTelescope;
	site: SiteEphemeris;
	exposureMs: number;
	slewMs: number;
	defaultFilter: string | null;
	limits: Limits;
	darkness: [number, number][];
	candidates: VisitState[];
	free: number;
	assignments: PlanAssignment[];
	cumulative: number;
	instants: Map<number, ApparentInstant>;
}

function positive(name: string, value: number): void {
	if (!Number.isFinite(value) || value <= 0) throw new Error(`${name} must be a positive number, got ${String(value)}`);
}

function nonNegative(name: string, value: number): void {
	if (!Number.isFinite(value) || value < 0) throw new Error(`${name} must be zero or more, got ${String(value)}`);
}

function claimMatches(c: PlanClaim, targetId: string, filter: string | null, epoch: number | null): boolean {
	if (c.targetId !== targetId) return false;
	if (c.filter != null && filter !== null && c.filter !== filter) return false;
	if (c.epoch != null && epoch !== null && c.epoch !== epoch) return false;
	return true;
}

/** Checks the input and sets up telescopes (ephemerides, darkness), visits, eligibility and claims. */
function prepare(input: PlanInput) {
	const startMs = input.start instanceof Date ? input.start.getTime() : NaN;
	if (!Number.isFinite(startMs)) throw new Error('start must be a valid Date');
	const horizonH = input.horizonH ?? 24;
	positive('horizonH', horizonH);
	if (horizonH > 96) throw new Error(`horizonH ${horizonH} is over the 96 h this planner is meant for`);
	const stepS = input.stepS ?? 300;
	positive('stepS', stepS);
	const stepMs = stepS * 1000;
	const endMs = startMs + horizonH * 3_600_000;
	const sunAltitudeLimitDeg = input.darkness === 'nautical' ? NAUTICAL_TWILIGHT_ALTITUDE_DEG : ASTRONOMICAL_TWILIGHT_ALTITUDE_DEG;
	const wideFieldMinAreaDeg2 = input.wideFieldMinAreaDeg2 ?? WIDE_FIELD_MIN_DEG2;
	const lastChanceRatio = input.lastChanceRatio ?? 0.5;
	const repeatPriority = input.repeatPriority ?? 1;
	const minEpochGapMs = (input.minEpochGapS ?? 3600) * 1000;
	const urgency = input.urgency ?? 'last-chance';
	nonNegative('lastChanceRatio', lastChanceRatio);
	nonNegative('repeatPriority', repeatPriority);
	nonNegative('minEpochGapS', minEpochGapMs);

	const telescopeIds = new Map<string, number>();
	input.telescopes.forEach((t, i) => {
		if (telescopeIds.has(t.id)) throw new Error(`telescope id ${t.id} appears twice`);
		telescopeIds.set(t.id, i);
		validateSite(t);
		nonNegative(`${t.id}: slewOverheadS`, t.slewOverheadS);
		positive(`${t.id}: maxAirmass`, t.maxAirmass);
	});
	const targetIds = new Set<string>();
	for (const t of input.targets) {
		if (targetIds.has(t.id)) throw new Error(`target id ${t.id} appears twice`);
		targetIds.add(t.id);
		validateTarget(t);
		nonNegative(`${t.id}: probability`, t.probability);
	}

	let maxSlotMs = 0;
	const exposureOf = (t: PlanTelescope): number => {
		const e = typeof input.exposureS === 'number' ? input.exposureS : (input.exposureS?.[t.id] ?? t.limitingMagExposureS);
		positive(`${t.id}: exposureS`, e);
		return e;
	};
	for (const t of input.telescopes) maxSlotMs = Math.max(maxSlotMs, (exposureOf(t) + t.slewOverheadS) * 1000);

	// Tables reach one slot past the end: the last-chance test looks one slot ahead.
	const global = ephemerisTables(startMs, endMs + 2 * maxSlotMs + stepMs);
	const sites = new Map<string, SiteEphemeris>();

	const telescopes: TelescopeState[] = input.telescopes.map((t, index) => {
		const key = `${t.latitudeDeg}|${t.longitudeDeg}|${t.elevationM}`;
		let site = sites.get(key);
		if (!site) sites.set(key, (site = siteEphemeris(global, t)));
		const defaultFilter = input.defaultFilter?.[t.id] ?? t.filters[0] ?? null;
		return {
			index,
			telescope: t,
			site,
			exposureMs: exposureOf(t) * 1000,
			slewMs: t.slewOverheadS * 1000,
			defaultFilter,
			limits: {
				sunAltitudeLimitDeg: sunAltitudeLimitDeg - MARGIN_DEG,
				minAltitudeDeg: t.minAltitudeDeg + MARGIN_DEG,
				maxAirmass: t.maxAirmass - AIRMASS_MARGIN,
				minSunSeparationDeg: t.minSunSeparationDeg + MARGIN_DEG,
				minMoonSeparationDeg: t.minMoonSeparationDeg + MARGIN_DEG
			},
			darkness: [],
			candidates: [],
			free: startMs,
			assignments: [],
			cumulative: 0,
			instants: new Map()
		};
	});

	const at = (ts: TelescopeState, ms: number): ApparentInstant => {
		let i = ts.instants.get(ms);
		if (!i) ts.instants.set(ms, (i = instantAt(global, ts.site, ms)));
		return i;
	};

	for (const ts of telescopes) ts.darkness = darkIntervals(startMs, endMs, stepMs, ts.limits.sunAltitudeLimitDeg, (ms) => at(ts, ms).sunAltitudeDeg);

	// Visits, eligibility and claims.
	const claims = input.claims ?? [];
	const visits: VisitState[] = [];
	const unitVectors: Vec3[] = input.targets.map((t) => unitVector(t.raDeg, t.decDeg));
	input.targets.forEach((target, targetIndex) => {
		const requested = target.visits && target.visits.length > 0 ? target.visits : [{}];
		const seen = new Set<string>();
		for (const v of requested) {
			const filter = v.filter ?? null;
			const epoch = v.epoch ?? null;
			if (epoch !== null && (!Number.isInteger(epoch) || epoch < 0)) throw new Error(`${target.id}: epoch must be a whole number ≥ 0`);
			const key = `${filter ?? ''}|${epoch ?? ''}`;
			if (seen.has(key)) continue;
			seen.add(key);
			const matching = claims.filter((c) => claimMatches(c, target.id, filter, epoch));
			const claimedBy = [...new Set(matching.map((c) => c.telescopeId))];
			const reservedFor = matching.length
				? new Set(claimedBy.map((id) => telescopeIds.get(id)).filter((i): i is number => i !== undefined))
				: null;
			const visit: VisitState = {
				index: visits.length,
				target,
				targetIndex,
				filter,
				epoch,
				reservedFor,
				claimedBy,
				filterFor: [],
				ineligibleWhy: [],
				assigned: null
			};
			for (const ts of telescopes) {
				const why = ineligibility(visit, ts, input.galaxiesOnWideField === true, wideFieldMinAreaDeg2);
				visit.filterFor.push(why === null ? (filter ?? ts.defaultFilter) : null);
				if (why === null) ts.candidates.push(visit);
				else visit.ineligibleWhy.push(why);
			}
			visits.push(visit);
		}
	});
	const visitsByTarget = new Map<number, VisitState[]>();
	for (const v of visits) {
		const list = visitsByTarget.get(v.targetIndex) ?? [];
		list.push(v);
		visitsByTarget.set(v.targetIndex, list);
	}
	const observe = (ts: TelescopeState, v: VisitState, s: number, e: number): Sample[] | null => {
		const u = unitVectors[v.targetIndex];
		const out: Sample[] = [];
		for (const ms of [s, (s + e) / 2, e]) {
			const sample = sampleAt(u, at(ts, ms), ts.limits);
			if (sample.stage !== Stage.Observable) return null;
			out.push(sample);
		}
		return out;
	};

	return {
		startMs,
		endMs,
		stepMs,
		horizonH,
		stepS,
		sunAltitudeLimitDeg,
		lastChanceRatio,
		repeatPriority,
		minEpochGapMs,
		urgency,
		telescopes,
		visits,
		visitsByTarget,
		unitVectors,
		at,
		observe
	};
}

/**
 * Plans the network's next `horizonH` hours: per telescope an ordered observing list, the visits
 * left out with a reason, and the expected covered probability over time. See the module comment
 * and docs/plan.md for the rules; constraints follow the telescope row (geometric altitude, Kasten
 * & Young 1989 airmass, geocentric solar elongation, topocentric Moon distance, as in apparent-place.ts and sun-moon.ts).
 */
export function planNetwork(input: PlanInput): NetworkPlan {
	const ctx = prepare(input);
	const { startMs, endMs, stepMs, horizonH, stepS, sunAltitudeLimitDeg, lastChanceRatio, repeatPriority, minEpochGapMs, urgency } = ctx;
	const { telescopes, visits, visitsByTarget, unitVectors, at, observe } = ctx;
	const covered = new Uint8Array(input.targets.length);

	const epochReady = (v: VisitState, startAt: number): boolean => {
		if (v.epoch === null) return true;
		for (const other of visitsByTarget.get(v.targetIndex) ?? []) {
			if (other.epoch === null || other.epoch >= v.epoch) continue;
			if (!other.assigned || Date.parse(other.assigned.end) + minEpochGapMs > startAt) return false;
		}
		return true;
	};

	/** Appends an exposure to the telescope's list (samples: observe() at s, middle, e). */
	const place = (ts: TelescopeState, v: VisitState, s: number, e: number, samples: Sample[], newProbability: number, lastChance: boolean): void => {
		const [first, mid, last] = samples;
		ts.cumulative += newProbability;
		const assignment: PlanAssignment = {
			order: ts.assignments.length + 1,
			telescopeId: ts.telescope.id,
			targetId: v.target.id,
			kind: v.target.kind,
			name: v.target.name ?? null,
			raDeg: v.target.raDeg,
			decDeg: v.target.decDeg,
			start: new Date(s).toISOString(),
			end: new Date(e).toISOString(),
			exposureS: ts.exposureMs / 1000,
			filter: v.filterFor[ts.index],
			epoch: v.epoch,
			altitudeDeg: first.altitudeDeg,
			altitudeEndDeg: last.altitudeDeg,
			airmass: first.airmass,
			maxAirmass: Math.max(first.airmass, mid.airmass, last.airmass),
			moonSepDeg: Math.min(first.moonSepDeg, mid.moonSepDeg, last.moonSepDeg),
			sunSepDeg: first.sunSepDeg,
			sunAltitudeDeg: at(ts, s).sunAltitudeDeg,
			probability: v.target.probability,
			newProbability,
			cumulativeProbability: ts.cumulative,
			lastChance
		};
		v.assigned = assignment;
		ts.assignments.push(assignment);
	};

	const improve = input.improve ?? urgency !== 'none';
	const observableInGrid = new Uint8Array(visits.length);
	if (!improve) greedyList();
	else {
		const grids = telescopes.map((ts) => visibilityGrid(ctx, ts));
		for (const g of grids) for (const list of g.visitsAt) for (const v of list) observableInGrid[v.index] = 1;
		greedyOnGrid(grids);
		let greedyCovered = 0;
		for (const ts of telescopes) greedyCovered += ts.cumulative;
		const best = coverageOptimum(ctx, grids);
		// Keep the greedy plan unless the optimum covers more (it then also fills the slots left).
		if (best.weight > greedyCovered + 1e-12 * Math.max(1, greedyCovered)) {
			for (const v of visits) v.assigned = null;
			for (const ts of telescopes) {
				ts.assignments = [];
				ts.cumulative = 0;
			}
			covered.fill(0);
			placeOptimum(grids, best);
		}
	}

	/** The greedy list scheduler with free times (urgency 'none' or improve: false). */
	function greedyList(): void {
		// Earliest-free telescope decides; decision times never go back, so every assignment that
		// ends before a decision is already known when the epoch order is checked.
		const active = new Set(telescopes);
		while (active.size > 0) {
			let ts: TelescopeState | null = null;
			for (const c of active) if (!ts || c.free < ts.free) ts = c;
			if (!ts) break;
			const s = ts.free + ts.slewMs;
			const e = s + ts.exposureMs;
			if (e > endMs) {
				active.delete(ts);
				continue;
			}
			const exposureMs = ts.exposureMs;
			const dark = ts.darkness.find(([a, b]) => Math.max(a, s) + exposureMs <= b);
			if (!dark) {
				active.delete(ts);
				continue;
			}
			if (s < dark[0]) {
				// The slew may run in twilight; the exposure starts when darkness does.
				ts.free = dark[0] - ts.slewMs;
				continue;
			}

			let best: { v: VisitState; samples: Sample[]; priority: number } | null = null;
			const observable: { v: VisitState; samples: Sample[]; priority: number }[] = [];
			for (const v of ts.candidates) {
				if (v.assigned || !epochReady(v, s)) continue;
				const samples = observe(ts, v, s, e);
				if (!samples) continue;
				const priority = v.target.probability * (covered[v.targetIndex] ? repeatPriority : 1);
				const entry = { v, samples, priority };
				observable.push(entry);
				if (!best || priority > best.priority) best = entry;
			}
			if (!best) {
				ts.free += stepMs;
				continue;
			}
			let chosen = best;
			let lastChance = false;
			if (urgency === 'last-chance' && observable.length > 1) {
				const s2 = e + ts.slewMs;
				const e2 = s2 + ts.exposureMs;
				if (observe(ts, best.v, s2, e2)) {
					let rescue: typeof best | null = null;
					for (const entry of observable) {
						if (entry === best || entry.priority < lastChanceRatio * best.priority) continue;
						if (rescue && entry.priority <= rescue.priority) continue;
						if (!observe(ts, entry.v, s2, e2)) rescue = entry;
					}
					if (rescue) {
						chosen = rescue;
						lastChance = true;
					}
				}
			}

			const v = chosen.v;
			const newProbability = covered[v.targetIndex] ? 0 : v.target.probability;
			covered[v.targetIndex] = 1;
			place(ts, v, s, e, chosen.samples, newProbability, lastChance);
			ts.free = e;
		}
	}

	/**
	 * The same greedy rules on the slot grid (visibilityGrid): a telescope with nothing
	 * observable waits one slot instead of `stepS`, so every exposure starts on its grid.
	 */
	function greedyOnGrid(grids: VisibilityGrid[]): void {
		const next = new Int32Array(telescopes.length);
		const priorityOf = (v: VisitState) => v.target.probability * (covered[v.targetIndex] ? repeatPriority : 1);
		const freeAt = (k: number) => grids[k].starts[next[k]] - telescopes[k].slewMs;
		const active = new Set(telescopes.filter((ts) => grids[ts.index].starts.length > 0).map((ts) => ts.index));
		while (active.size > 0) {
			let k = -1;
			for (const c of active) if (k < 0 || freeAt(c) < freeAt(k)) k = c;
			const ts = telescopes[k];
			const grid = grids[k];
			const j = next[k];
			next[k] = j + 1;
			if (next[k] >= grid.starts.length) active.delete(k);
			const s = grid.starts[j];
			const e = s + ts.exposureMs;
			const here = grid.visitsAt[j];
			let best: VisitState | null = null;
			let bestPriority = -1;
			let count = 0;
			for (const v of here) {
				if (v.assigned || !epochReady(v, s)) continue;
				count++;
				const priority = priorityOf(v);
				if (!best || priority > bestPriority) {
					best = v;
					bestPriority = priority;
				}
			}
			if (!best) continue;
			let chosen = best;
			let lastChance = false;
			if (urgency === 'last-chance' && count > 1 && grid.observableNext(best, j)) {
				let rescue: VisitState | null = null;
				let rescuePriority = -1;
				for (const v of here) {
					if (v === best || v.assigned || !epochReady(v, s)) continue;
					const priority = priorityOf(v);
					if (priority < lastChanceRatio * bestPriority) continue;
					if (rescue && priority <= rescuePriority) continue;
					if (!grid.observableNext(v, j)) {
						rescue = v;
						rescuePriority = priority;
					}
				}
				if (rescue) {
					chosen = rescue;
					lastChance = true;
				}
			}
			const v = chosen;
			const samples = observe(ts, v, s, e);
			if (!samples) throw new Error(`internal: ${v.target.id} not observable in its slot`);
			const newProbability = covered[v.targetIndex] ? 0 : v.target.probability;
			covered[v.targetIndex] = 1;
			place(ts, v, s, e, samples, newProbability, lastChance);
		}
	}

	/**
	 * Writes the optimum's covering visits into the lists: per telescope, more probable targets
	 * are moved to earlier slots where both visits stay observable; then the free slots, in time
	 * order, take the remaining visits (other filters, later epochs) by the greedy priority.
	 */
	function placeOptimum(grids: VisibilityGrid[], best: { slotVisit: Int32Array; offsets: number[] }): void {
		const slotted: (VisitState | null)[][] = grids.map((g, k) => g.starts.map((_, j) => {
			const vi = best.slotVisit[best.offsets[k] + j];
			return vi < 0 ? null : visits[vi];
		}));
		const p = (v: VisitState | null) => (v ? v.target.probability : -1);
		for (const [k, list] of slotted.entries()) {
			const grid = grids[k];
			for (let i = 0; i < list.length; i++) {
				for (let j = i + 1; j < list.length; j++) {
					const a = list[i];
					const b = list[j];
					if (!b || p(b) <= p(a) || !grid.observable(b, i) || (a && !grid.observable(a, j))) continue;
					list[i] = b;
					list[j] = a;
				}
			}
		}
		const endOf = new Float64Array(visits.length).fill(NaN);
		for (const [k, list] of slotted.entries()) {
			list.forEach((v, j) => {
				if (v) endOf[v.index] = grids[k].starts[j] + telescopes[k].exposureMs;
			});
		}
		const ready = (v: VisitState, s: number): boolean => {
			if (v.epoch === null) return true;
			for (const other of visitsByTarget.get(v.targetIndex) ?? []) {
				if (other.epoch === null || other.epoch >= v.epoch) continue;
				if (!(endOf[other.index] + minEpochGapMs <= s)) return false;
			}
			return true;
		};
		const isCovered = new Uint8Array(input.targets.length);
		for (const v of visits) if (!Number.isNaN(endOf[v.index])) isCovered[v.targetIndex] = 1;
		const free: [number, number][] = [];
		slotted.forEach((list, k) => list.forEach((v, j) => v || free.push([k, j])));
		free.sort((x, y) => grids[x[0]].starts[x[1]] - grids[y[0]].starts[y[1]] || x[0] - y[0]);
		for (const [k, j] of free) {
			const s = grids[k].starts[j];
			let pick: VisitState | null = null;
			let pickPriority = -1;
			for (const v of grids[k].visitsAt[j]) {
				if (!Number.isNaN(endOf[v.index]) || !ready(v, s)) continue;
				const priority = v.target.probability * (isCovered[v.targetIndex] ? repeatPriority : 1);
				if (priority > pickPriority) {
					pick = v;
					pickPriority = priority;
				}
			}
			if (!pick) continue;
			slotted[k][j] = pick;
			endOf[pick.index] = s + telescopes[k].exposureMs;
			isCovered[pick.targetIndex] = 1;
		}
		// Network-wide first coverage: the exposure that ends first (then the lower telescope index).
		const all: { k: number; j: number; v: VisitState; e: number }[] = [];
		slotted.forEach((list, k) => list.forEach((v, j) => v && all.push({ k, j, v, e: grids[k].starts[j] + telescopes[k].exposureMs })));
		all.sort((x, y) => x.e - y.e || x.k - y.k || x.j - y.j);
		const firstOf = new Set<string>();
		for (const x of all) {
			if (covered[x.v.targetIndex]) continue;
			covered[x.v.targetIndex] = 1;
			firstOf.add(`${x.k}|${x.j}`);
		}
		for (const [k, list] of slotted.entries()) {
			const ts = telescopes[k];
			const grid = grids[k];
			list.forEach((v, j) => {
				if (!v) return;
				const s = grid.starts[j];
				const e = s + ts.exposureMs;
				const samples = observe(ts, v, s, e);
				if (!samples) throw new Error(`internal: ${v.target.id} not observable in its slot`);
				// Ahead of a more probable visit of this list, and gone by the next slot.
				const lastChance = !grid.observableNext(v, j) && list.some((w, i) => i > j && w !== null && w.target.probability > v.target.probability);
				place(ts, v, s, e, samples, firstOf.has(`${k}|${j}`) ? v.target.probability : 0, lastChance);
			});
		}
	}

	// Why the rest was left out.
	const dropped: DroppedVisit[] = [];
	for (const v of visits) {
		if (v.assigned) continue;
		dropped.push({ targetId: v.target.id, filter: v.filter, epoch: v.epoch, probability: v.target.probability, ...dropReason(v) });
	}

	function dropReason(v: VisitState): { reason: DropReason; detail: string } {
		if (v.reservedFor && v.reservedFor.size === 0) {
			return { reason: 'claimed', detail: `claimed by ${v.claimedBy.join(', ')}, not a telescope of this plan` };
		}
		const eligible = telescopes.filter((ts) => v.filterFor[ts.index] !== null);
		if (eligible.length === 0) {
			return { reason: 'no-telescope', detail: [...new Set(v.ineligibleWhy)].join('; ') };
		}
		const u = unitVectors[v.targetIndex];
		// Solar elongation first: a target near the Sun is up only in daylight, and saying so is
		// more useful than "never above the horizon in the dark".
		let maxElongation = -Infinity;
		let sunAlwaysClose = !observableInGrid[v.index];
		// (The largest elongation is only reported when the Sun is always too close.)
		elongation: for (const ts of eligible) {
			if (!sunAlwaysClose) break;
			for (let ms = startMs; ms <= endMs; ms += stepMs) {
				const i = at(ts, ms);
				const el = sunElongationDeg(u, i);
				maxElongation = Math.max(maxElongation, el);
				if (el >= ts.limits.minSunSeparationDeg) {
					sunAlwaysClose = false;
					break elongation;
				}
			}
		}
		if (sunAlwaysClose) {
			const limit = Math.min(...eligible.map((ts) => ts.telescope.minSunSeparationDeg));
			return {
				reason: 'sun',
				detail: `solar elongation at most ${maxElongation.toFixed(1)}°, inside the ${limit}° Sun-avoidance limit: up only near the Sun`
			};
		}
		// Observable in a slot of the grid: the time went elsewhere. Otherwise the furthest stage
		// reached on the stepS grid (the highest altitude is only reported below Stage.AboveAltitude).
		let stage: Stage = observableInGrid[v.index] ? Stage.Observable : Stage.Daylight;
		let highestDarkDeg = -Infinity;
		stages: for (const ts of eligible) {
			if (stage === Stage.Observable) break;
			for (let ms = startMs; ms <= endMs; ms += stepMs) {
				const sample = sampleAt(u, at(ts, ms), ts.limits);
				if (sample.stage >= Stage.Dark) highestDarkDeg = Math.max(highestDarkDeg, sample.altitudeDeg);
				if (sample.stage > stage) stage = sample.stage;
				if (stage === Stage.Observable) break stages;
			}
		}
		const where = eligible.map((ts) => ts.telescope.name).join(', ');
		switch (stage) {
			case Stage.Daylight:
				return { reason: 'no-darkness', detail: `no darkness (Sun below ${sunAltitudeLimitDeg}°) at ${where} within the plan` };
			case Stage.Dark:
				return {
					reason: 'below-altitude',
					detail: `never above the altitude limit during darkness at ${where} (highest ${highestDarkDeg.toFixed(1)}°)`
				};
			case Stage.AboveAltitude:
				return { reason: 'airmass', detail: `airmass above the limit whenever it is dark and high enough at ${where}` };
			case Stage.WithinAirmass:
				return { reason: 'sun', detail: `inside the Sun-avoidance limit whenever it is dark and high enough at ${where}` };
			case Stage.ClearOfSun:
				return { reason: 'moon', detail: `too close to the Moon whenever it is otherwise observable at ${where}` };
			default: {
				const waiting = (visitsByTarget.get(v.targetIndex) ?? []).some((o) => o.epoch !== null && v.epoch !== null && o.epoch < v.epoch && !o.assigned);
				if (waiting) return { reason: 'epoch-order', detail: `an earlier epoch of this target was not planned` };
				return { reason: 'no-time', detail: `observable at ${where}, but the time went to more probable targets` };
			}
		}
	}

	// Coverage curves: each target counts once, when its first exposure ends.
	const all = telescopes.flatMap((ts) => ts.assignments).filter((a) => a.newProbability > 0);
	all.sort((a, b) => Date.parse(a.end) - Date.parse(b.end));
	const point = (ms: number, probability: number): CoveragePoint => ({
		timeH: (ms - startMs) / 3_600_000,
		time: new Date(ms).toISOString(),
		probability
	});
	const curve = (list: PlanAssignment[]): CoveragePoint[] => {
		const points = [point(startMs, 0)];
		let sum = 0;
		for (const a of list) {
			sum += a.newProbability;
			points.push(point(Date.parse(a.end), sum));
		}
		points.push(point(endMs, sum));
		return points;
	};
	const coverage = curve(all);

	return {
		start: new Date(startMs).toISOString(),
		end: new Date(endMs).toISOString(),
		horizonH,
		stepS,
		sunAltitudeLimitDeg,
		telescopes: telescopes.map((ts) => ({
			telescopeId: ts.telescope.id,
			name: ts.telescope.name,
			exposureS: ts.exposureMs / 1000,
			slewOverheadS: ts.telescope.slewOverheadS,
			defaultFilter: ts.defaultFilter,
			darkness: ts.darkness.map(([a, b]) => ({ start: new Date(a).toISOString(), end: new Date(b).toISOString() })),
			assignments: ts.assignments,
			coverage: curve(all.filter((a) => a.telescopeId === ts.telescope.id))
		})),
		dropped,
		coverage,
		coveredProbability: coverage[coverage.length - 1].probability,
		offeredProbability: input.targets.reduce((s, t) => s + t.probability, 0)
	};
}

type Context = ReturnType<typeof prepare>;

const RAD = Math.PI / 180;

/** Geometric altitude at which the airmass (Kasten & Young, on the refracted altitude) reaches `maxAirmass`; −90 when it never does above the horizon. */
function airmassAltitudeDeg(maxAirmass: number): number {
	const x = (h: number) => airmassKastenYoung1989(h + standardRefractionDeg(h)) ?? Infinity;
	if (x(-1) <= maxAirmass) return -90;
	if (x(90) > maxAirmass) return 90;
	let lo = -1;
	let hi = 90;
	while (hi - lo > 1e-9) {
		const m = (lo + hi) / 2;
		if (x(m) > maxAirmass) lo = m;
		else hi = m;
	}
	return hi;
}

/**
 * One telescope's slot grid and what is observable in each slot. The grid is where the greedy
 * list scheduler puts exposures when it never waits less than a slot: in each dark interval the
 * first exposure starts at max(darkness start, plan start + slew), the next ones one slew +
 * exposure later, while the exposure still ends inside the interval and the plan.
 */
interface VisibilityGrid {
	/** Exposure starts, ms. */
	starts: number[];
	/** Per slot, the visits the telescope may take there (eligible, observable at start, middle and end). */
	visitsAt: VisitState[][];
	observable(v: VisitState, slot: number): boolean;
	/** Observable in the slot right after `slot` (false when the next slot is in a later dark interval). */
	observableNext(v: VisitState, slot: number): boolean;
	/** Per visit index, the slots where it is observable (undefined: none). */
	slotsOf: (number[] | undefined)[];
}

function slotStarts(ctx: Context, ts: TelescopeState): { starts: number[]; adjacent: boolean[] } {
	const starts: number[] = [];
	const adjacent: boolean[] = [];
	const cycle = ts.slewMs + ts.exposureMs;
	let s = ctx.startMs + ts.slewMs;
	for (;;) {
		if (s + ts.exposureMs > ctx.endMs) break;
		const dark = ts.darkness.find(([a, b]) => Math.max(a, s) + ts.exposureMs <= b);
		if (!dark) break;
		if (s < dark[0]) {
			if (adjacent.length) adjacent[adjacent.length - 1] = false;
			s = dark[0];
		}
		starts.push(s);
		adjacent.push(true);
		s += cycle;
	}
	if (adjacent.length) adjacent[adjacent.length - 1] = false;
	return { starts, adjacent };
}

function visibilityGrid(ctx: Context, ts: TelescopeState): VisibilityGrid {
	const { starts, adjacent } = slotStarts(ctx, ts);
	const n = starts.length;
	const ok = new Uint8Array(ctx.visits.length * n);
	const visitsAt: VisitState[][] = starts.map(() => []);
	// Most (visit, slot) pairs are decided from three dot products per instant: the target's
	// unaberrated direction against the zenith, the Sun and the Moon. Annual aberration moves a
	// direction by under 1e-4 rad, so each cosine is within 1e-4 of the one sampleAt uses;
	// only pairs within SLACK of a limit go through the full test (observe), so the answer is
	// the same as testing every pair with observe.
	const SLACK = 3e-4;
	const L = ts.limits;
	const sinAlt = Math.sin(Math.max(L.minAltitudeDeg, airmassAltitudeDeg(L.maxAirmass)) * RAD);
	const sunCos = Math.cos(L.minSunSeparationDeg * RAD);
	const moonCos = Math.cos(L.minMoonSeparationDeg * RAD);
	// Per slot and instant (start, middle, end): zenith, Sun and Moon unit vectors.
	const vec = new Float64Array(27 * n);
	const dark = new Uint8Array(n);
	const slotsOf: (number[] | undefined)[] = [];
	starts.forEach((s, j) => {
		dark[j] = 1;
		[s, (s + (s + ts.exposureMs)) / 2, s + ts.exposureMs].forEach((ms, m) => {
			const i = ctx.at(ts, ms);
			if (i.sunAltitudeDeg > L.sunAltitudeLimitDeg) dark[j] = 0;
			const o = 27 * j + 9 * m;
			vec.set(i.zenith, o);
			const sn = Math.hypot(...i.sunGeo);
			const mn = Math.hypot(...i.moonTopo);
			for (let c = 0; c < 3; c++) {
				vec[o + 3 + c] = i.sunGeo[c] / sn;
				vec[o + 6 + c] = i.moonTopo[c] / mn;
			}
		});
	});
	for (const v of ts.candidates) {
		const base = v.index * n;
		const [ux, uy, uz] = ctx.unitVectors[v.targetIndex];
		for (let j = 0; j < n; j++) {
			if (!dark[j]) continue;
			let sure = true;
			let no = false;
			for (let o = 27 * j, m = 0; m < 3; m++, o += 9) {
				const alt = ux * vec[o] + uy * vec[o + 1] + uz * vec[o + 2];
				const sun = ux * vec[o + 3] + uy * vec[o + 4] + uz * vec[o + 5];
				const moon = ux * vec[o + 6] + uy * vec[o + 7] + uz * vec[o + 8];
				if (alt < sinAlt - SLACK || sun > sunCos + SLACK || moon > moonCos + SLACK) {
					no = true;
					break;
				}
				if (alt < sinAlt + SLACK || sun > sunCos - SLACK || moon > moonCos - SLACK) sure = false;
			}
			if (no) continue;
			if (sure || ctx.observe(ts, v, starts[j], starts[j] + ts.exposureMs)) {
				ok[base + j] = 1;
				visitsAt[j].push(v);
				(slotsOf[v.index] ??= []).push(j);
			}
		}
	}
	const observable = (v: VisitState, j: number) => j >= 0 && j < n && ok[v.index * n + j] === 1;
	return { starts, visitsAt, slotsOf, observable, observableNext: (v, j) => adjacent[j] === true && observable(v, j + 1) };
}

/** Per target, its visits that wait for no other (no epoch, or its lowest epoch). */
function coveringVisits(ctx: Context): VisitState[][] {
	const out: VisitState[][] = [];
	for (const [t, list] of ctx.visitsByTarget) {
		let lowest = Infinity;
		for (const v of list) if (v.epoch !== null) lowest = Math.min(lowest, v.epoch);
		out[t] = list.filter((v) => v.epoch === null || v.epoch === lowest);
	}
	return out;
}

/** The largest covered probability on the slot grids (plan-matching.ts), with the visit per slot. */
function coverageOptimum(ctx: Context, grids: VisibilityGrid[]): { weight: number; slotVisit: Int32Array; offsets: number[] } {
	const offsets: number[] = [];
	let slotCount = 0;
	for (const g of grids) {
		offsets.push(slotCount);
		slotCount += g.starts.length;
	}
	const covering = coveringVisits(ctx);
	const weights = new Float64Array(covering.length);
	const startOf = new Float64Array(slotCount);
	grids.forEach((g, k) => startOf.set(g.starts, offsets[k]));
	const edges = covering.map((list, t) => {
		// The visit's slot lists are each in time order: merge them, earliest first (then the
		// lower telescope index, whose offsets are lower).
		const lists: { slots: number[]; offset: number; visit: number }[] = [];
		let total = 0;
		for (const v of list ?? []) {
			weights[t] = v.target.probability;
			for (const ts of ctx.telescopes) {
				const slots = grids[ts.index].slotsOf[v.index];
				if (!slots) continue;
				lists.push({ slots, offset: offsets[ts.index], visit: v.index });
				total += slots.length;
			}
		}
		const slots = new Int32Array(total);
		const visitOf = new Int32Array(total);
		const head = new Int32Array(lists.length);
		for (let i = 0; i < total; i++) {
			let pick = -1;
			let pickAt = Infinity;
			let pickSlot = 0;
			for (let l = 0; l < lists.length; l++) {
				if (head[l] >= lists[l].slots.length) continue;
				const g = lists[l].offset + lists[l].slots[head[l]];
				if (startOf[g] < pickAt || (startOf[g] === pickAt && g < pickSlot)) {
					pick = l;
					pickAt = startOf[g];
					pickSlot = g;
				}
			}
			slots[i] = pickSlot;
			visitOf[i] = lists[pick].visit;
			head[pick]++;
		}
		return { slots, visits: visitOf };
	});
	const m = maxWeightCover({ slotCount, weights, edges });
	return { weight: m.weight, slotVisit: m.visit, offsets };
}

/**
 * The planning problem on the slot grid, as the improved planner sees it (plan-milp.ts writes it
 * as a mixed-integer program): per telescope its slots, per visit the slots where it is allowed
 * and observable, computed by the planner's own code (prepare, slotStarts, observe).
 */
export interface SlotProblem {
	startMs: number;
	endMs: number;
	minEpochGapMs: number;
	targets: { id: string; probability: number }[];
	telescopes: { id: string; exposureMs: number; slewMs: number; starts: number[] }[];
	visits: { targetIndex: number; filter: string | null; epoch: number | null; options: { telescope: number; slot: number }[] }[];
}

export function slotProblem(input: PlanInput): SlotProblem {
	const ctx = prepare(input);
	const grids = ctx.telescopes.map((ts) => visibilityGrid(ctx, ts));
	return {
		startMs: ctx.startMs,
		endMs: ctx.endMs,
		minEpochGapMs: ctx.minEpochGapMs,
		targets: input.targets.map((t) => ({ id: t.id, probability: t.probability })),
		telescopes: ctx.telescopes.map((ts, k) => ({ id: ts.telescope.id, exposureMs: ts.exposureMs, slewMs: ts.slewMs, starts: grids[k].starts })),
		visits: ctx.visits.map((v) => ({
			targetIndex: v.targetIndex,
			filter: v.filter,
			epoch: v.epoch,
			options: ctx.telescopes.flatMap((ts, k) =>
				v.filterFor[k] === null ? [] : grids[k].starts.flatMap((_, j) => (grids[k].observable(v, j) ? [{ telescope: k, slot: j }] : []))
			)
		}))
	};
}

function ineligibility(v: VisitState, ts: TelescopeState, galaxiesOnWideField: boolean, wideFieldMinAreaDeg2: number): string | null {
	const t = ts.telescope;
	if (v.reservedFor) {
		if (!v.reservedFor.has(ts.index)) return `claimed by ${v.claimedBy.join(', ')}`;
	} else if (v.target.kind === 'field') {
		const owners = v.target.fieldFor === undefined ? null : typeof v.target.fieldFor === 'string' ? [v.target.fieldFor] : v.target.fieldFor;
		if (owners && !owners.includes(t.id)) return `field tiled for ${owners.join(', ')}`;
	} else if (!galaxiesOnWideField && fovAreaDeg2(t) >= wideFieldMinAreaDeg2) {
		return `galaxies go to narrow-field telescopes (field of view under ${wideFieldMinAreaDeg2} deg²)`;
	}
	if (v.filter !== null && !t.filters.includes(v.filter)) return `filter ${v.filter} not on ${t.name}`;
	if (v.filter === null && ts.defaultFilter === null) return `${t.name} lists no filter`;
	return null;
}
