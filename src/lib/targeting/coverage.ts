/**
 * Probability covered by completed observations: the UNION of their footprints on the sky map
 * (every bit of sky counted once, however many footprints overlap it), overall, per group (team),
 * and as a cumulative curve in time; and, for galaxy-targeted searches, the fraction of the
 * ranked galaxy probability observed.
 *
 * Method. The map is piecewise constant on its HEALPix pixels (Górski et al. 2005). Each map
 * pixel is tested against the footprints near it as a cap of its circumradius (healpy 1.16.1's
 * `max_pixrad` is at most 1.0446 × the mean pixel side at every order, and equals the largest
 * centre-to-boundary distance; 1.1 × the side is used, see tests/fixtures/coverage):
 *  - a footprint certainly disjoint from the cap is dropped;
 *  - when every remaining footprint certainly contains the cap, the pixel's whole probability is
 *    assigned at once;
 *  - otherwise the pixel is split into its four nested children (sub-pixelisation) until it is
 *    at the evaluation order of every footprint that may cross it; there a pixel counts as inside a
 *    footprint when its centre is (the rule of healpy's `query_polygon` / `query_disc` with
 *    inclusive=False). A footprint's evaluation order makes the pixel side at most 1/32 of its
 *    smallest side (`pixelsAcross`), or is fixed by `evaluationOrder`. Map pixels finer than that
 *    are tested by their own centre.
 * Geometry (great-circle rectangle sides, caps) is in `sky-geometry.ts`. With a fixed order equal
 * to healpy's, the result is healpy's pixel sum (tests/fixtures/coverage, to 1e-9).
 *
 * Pixelisation error. Only evaluation pixels that an edge may cross are counted wholly in or
 * out, so |union − exact union| ≤ the probability of evaluation pixels that no footprint
 * certainly contains and some footprint may partly cover (`errorBound`; likewise per group).
 * It is a worst case, a strip about 2.2 pixel sides wide along the union's edge all counted
 * wrongly; the miscounts on the two sides of an edge mostly cancel, and on the fixture the
 * default-order union is within 1.1e-4 of healpy's at order 10 against a bound of 0.045.
 */
import { deinterleave, nestToAng, nestToRing, npix, SPHERE_DEG2, type SkyMap } from '../sky/index.ts';
import { areaTable, nestedPixel } from '../sky/moc.ts';
import { containsVector, DISC_OUTSIDE, discRelation, footprintGeometry, type FootprintGeometry, type FootprintSpec, type Vec3 } from './sky-geometry.ts';

const DEG = Math.PI / 180;
/** Order of the coarse index that buckets footprints by the sky region they touch. */
const BUCKET_ORDER = 3;
/** Pixel circumradius over the mean side, with margin over healpy's largest (1.0446). */
export const PIXEL_RADIUS_FACTOR = 1.1;
const MAX_EVALUATION_ORDER = 16;

/** A completed observation: where, what shape, which group (team) took it, when (Unix ms). */
export type ObservedFootprint = FootprintSpec & { id: string; groupId: string; timeMs: number };

export interface CoverageOptions {
	/** Evaluate every edge at this order (overrides `pixelsAcross`). */
	evaluationOrder?: number;
	/** Each footprint's edge is resolved with pixels of side ≤ its smallest side / this (default 32; orders ≤ 16). */
	pixelsAcross?: number;
	/** Merger time (Unix ms): curve points then carry the time since merger. */
	mergerTimeMs?: number;
}

export interface CurvePoint {
	/** The observation that completes this point (observations in time order, ties by input order). */
	id: string;
	groupId: string;
	timeMs: number;
	sinceMergerS: number | null;
	/** Union probability of this and all earlier observations. */
	union: number;
}

export interface GroupCoverage {
	groupId: string;
	observations: number;
	/** Probability in the union of the group's footprints. */
	union: number;
	errorBound: number;
	curve: CurvePoint[];
}

export interface Coverage {
	evaluationOrder: number;
	/** Probability in the union of all footprints. */
	union: number;
	/** Pixelisation bound on |union − exact union| (see the module note). */
	errorBound: number;
	/** Σ over footprints of each footprint's own probability: overlaps counted again (≥ union). */
	sumOfFootprints: number;
	/** Each footprint's own probability, in input order. */
	footprints: { id: string; groupId: string; timeMs: number; probability: number }[];
	groups: GroupCoverage[];
	curve: CurvePoint[];
	/** Evaluation pixels visited (a cost measure). */
	leavesTested: number;
}

/** Mean pixel side at an order, degrees. */
function pixelSideDeg(order: number): number {
	return Math.sqrt(SPHERE_DEG2 / npix(order));
}

function smallestSideDeg(f: FootprintSpec): number {
	return f.shape === 'rectangle' ? Math.min(f.widthDeg, f.heightDeg) : f.diameterDeg;
}

const JRLL = [2, 2, 2, 2, 3, 3, 3, 3, 4, 4, 4, 4];
const JPLL = [1, 3, 5, 7, 0, 2, 4, 6, 1, 3, 5, 7];

/**
 * Unit vector of a nested pixel's centre, written into `out`: face/x/y → ring and position in the
 * ring → (z, φ), the HEALPix library's pix2loc (Górski et al. 2005 §4), with sin θ from
 * √(t(2 − t)) near the poles for precision.
 */
function pixelCentre(order: number, ipix: number, out: Float64Array): void {
	const n = 2 ** order;
	const n2 = n * n;
	const face = Math.floor(ipix / n2);
	const { x, y } = deinterleave(ipix - face * n2);
	const jr = JRLL[face] * n - x - y - 1;
	let nr: number;
	let z: number;
	let st: number;
	let kshift: number;
	if (jr < n) {
		nr = jr;
		const t = (nr * nr) / (3 * n2);
		z = 1 - t;
		st = Math.sqrt(t * (2 - t));
		kshift = 0;
	} else if (jr > 3 * n) {
		nr = 4 * n - jr;
		const t = (nr * nr) / (3 * n2);
		z = t - 1;
		st = Math.sqrt(t * (2 - t));
		kshift = 0;
	} else {
		nr = n;
		z = ((2 * n - jr) * 2) / (3 * n);
		st = Math.sqrt((1 - z) * (1 + z));
		kshift = (jr - n) & 1;
	}
	let jp = (JPLL[face] * nr + x - y + 1 + kshift) / 2;
	if (jp > 4 * n) jp -= 4 * n;
	if (jp < 1) jp += 4 * n;
	const phi = (jp - (kshift + 1) * 0.5) * (Math.PI / 2 / nr);
	out[0] = st * Math.cos(phi);
	out[1] = st * Math.sin(phi);
	out[2] = z;
}

function angToVector(theta: number, phi: number): Vec3 {
	const s = Math.sin(theta);
	return [s * Math.cos(phi), s * Math.sin(phi), Math.cos(theta)];
}

/**
 * What `extendCoverage` needs to add footprints to a result without going over the old ones
 * again: the footprints in time order and each one's credits so far. Plain data and typed arrays
 * (it crosses to and from the work pool's threads).
 */
export interface CoverageState {
	/** The options the state was made with (`evaluationOrder` or `pixelsAcross`); an extension must use the same. */
	evaluationOrderOption: number | null;
	pixelsAcross: number;
	/** Footprints in rank (time) order. */
	ranked: ObservedFootprint[];
	/** Position of each rank in the inputs (the inputs of the first call and every extension, in turn). */
	inputOf: Int32Array;
	/** Per rank: probability inside the footprint; first covered by it; first covered within its group. */
	own: Float64Array;
	firstOverall: Float64Array;
	firstInGroup: Float64Array;
	/** Groups by first appearance in rank order, and each group's error bound. */
	groupIds: string[];
	groupUncertain: number[];
	uncertain: number;
	evaluationOrder: number;
	/** Extensions since the last full computation (0 for a full one). */
	extensions: number;
}

/** How `extendCoverage` got its result. */
export type ExtendMode = 'unchanged' | 'extended' | 'recomputed';

function checkedOptions(options: CoverageOptions): { fixedOrder: number | undefined; across: number } {
	const fixedOrder = options.evaluationOrder;
	if (fixedOrder !== undefined && !(Number.isInteger(fixedOrder) && fixedOrder >= 0 && fixedOrder <= 24)) {
		throw new RangeError(`evaluation order ${fixedOrder} is outside 0…24`);
	}
	const across = options.pixelsAcross ?? 32;
	if (!(across >= 1)) throw new RangeError(`pixelsAcross ${across} must be at least 1`);
	return { fixedOrder, across };
}

/** A footprint's evaluation order: pixel side ≤ its smallest side / `across`, or the fixed order. */
function leafOrderOf(f: FootprintSpec, fixedOrder: number | undefined, across: number): number {
	if (fixedOrder !== undefined) return fixedOrder;
	const side = smallestSideDeg(f);
	let o = 0;
	while (pixelSideDeg(o) > side / across && o < MAX_EVALUATION_ORDER) o++;
	return o;
}

const RADIUS = Float64Array.from({ length: 30 }, (_, o) => PIXEL_RADIUS_FACTOR * pixelSideDeg(o) * DEG);
const SIN_RADIUS = RADIUS.map(Math.sin);
let bucketCentres: Vec3[] | null = null;
function bucketCentre(b: number): Vec3 {
	bucketCentres ??= Array.from({ length: npix(BUCKET_ORDER) }, (_, k) => {
		const { theta, phi } = nestToAng(BUCKET_ORDER, k);
		return angToVector(theta, phi);
	});
	return bucketCentres[b];
}

/** Coarse pixels (order BUCKET_ORDER) that a footprint may touch, marked in `out`. */
function markBuckets(g: FootprintGeometry, out: Uint8Array): void {
	for (let b = 0; b < out.length; b++) if (!out[b] && discRelation(g, bucketCentre(b), RADIUS[BUCKET_ORDER], SIN_RADIUS[BUCKET_ORDER]) !== DISC_OUTSIDE) out[b] = 1;
}

/** Per-rank accumulators the traversal adds to. */
interface Accumulators {
	ranked: ObservedFootprint[];
	groupOf: Int32Array;
	nGroups: number;
	own: Float64Array;
	firstOverall: Float64Array;
	firstInGroup: Float64Array;
	groupUncertain: Float64Array;
}

/**
 * The traversal. `local` lists the ranks (ascending) of the footprints to consider; those of rank
 * ≥ `firstNew` are the NEW ones. Only map pixels that a new footprint may touch are visited, and
 * at each counted pixel only the new footprints are credited, with what the older ones there
 * already cover taken away (own probability: always; first overall: when no older footprint
 * covers it; first in its group: when no older one of the group covers it). With `firstNew` = 0
 * this is the full computation. `buckets` limits the map pixels to those coarse pixels (null:
 * all). Returns the error-bound mass of the new part and the leaves tested.
 */
function accumulate(
	map: SkyMap,
	acc: Accumulators,
	local: Int32Array,
	firstNew: number,
	leafOrderOfRank: (r: number) => number,
	onlyBuckets: Uint8Array | null
): { uncertain: number; leaves: number } {
	const nF = local.length;
	if (nF === 0) return { uncertain: 0, leaves: 0 };
	const { groupOf, nGroups, own, firstOverall, firstInGroup, groupUncertain } = acc;
	const rankOf = local;
	const geoms: FootprintGeometry[] = Array.from(local, (r) => footprintGeometry(acc.ranked[r]));
	const leafOrder = Int32Array.from(local, (r) => leafOrderOfRank(r));
	const isNew = Uint8Array.from(local, (r) => (r >= firstNew ? 1 : 0));
	const areas = areaTable();

	// Footprints (local indices, ascending) touching each coarse pixel.
	const nb = npix(BUCKET_ORDER);
	const empty = new Int32Array(0);
	const buckets: Int32Array[] = [];
	for (let b = 0; b < nb; b++) {
		if (onlyBuckets && !onlyBuckets[b]) {
			buckets.push(empty);
			continue;
		}
		const p = bucketCentre(b);
		const list: number[] = [];
		let anyNew = false;
		for (let l = 0; l < nF; l++) {
			if (discRelation(geoms[l], p, RADIUS[BUCKET_ORDER], SIN_RADIUS[BUCKET_ORDER]) === DISC_OUTSIDE) continue;
			list.push(l);
			if (isNew[l]) anyNew = true;
		}
		buckets.push(anyNew ? Int32Array.from(list) : empty);
	}
	const allLocal = Int32Array.from(local.keys());

	let uncertain = 0;
	// Per-call scratch for groups, reset by stamping.
	const seenStamp = new Int32Array(nGroups);
	const oldCertainStamp = new Int32Array(nGroups);
	const oldPartialStamp = new Int32Array(nGroups);
	const newCertainStamp = new Int32Array(nGroups);
	const newTouchStamp = new Int32Array(nGroups);
	let stamp = 0;
	let leaves = 0;

	/**
	 * Credit `mass` to the NEW footprints among `inside` (local indices, rank order): own; first
	 * overall when no older footprint is inside; first in the group when no older one of the group is.
	 */
	const credit = (mass: number, inside: ArrayLike<number>, n: number) => {
		if (n === 0) return;
		stamp++;
		for (let k = 0; k < n; k++) {
			const l = inside[k];
			const r = rankOf[l];
			const g = groupOf[r];
			if (!isNew[l]) {
				seenStamp[g] = stamp;
				continue;
			}
			own[r] += mass;
			if (k === 0) firstOverall[r] += mass;
			if (seenStamp[g] !== stamp) {
				seenStamp[g] = stamp;
				firstInGroup[r] += mass;
			}
		}
	};

	const scratch: Int32Array[] = Array.from({ length: 31 }, () => new Int32Array(nF));
	const leafInside = new Int32Array(nF);

	// Per footprint and order: cos(ρ + r) (disjoint below) and, for caps, cos(ρ − r) (inside above).
	const cosOuter = new Float64Array(30 * nF);
	const cosInner = new Float64Array(30 * nF);
	for (let o = 0; o < 30; o++) {
		for (let f = 0; f < nF; f++) {
			const rho = geoms[f].circumradiusRad;
			cosOuter[o * nF + f] = rho + RADIUS[o] < Math.PI ? Math.cos(rho + RADIUS[o]) : -2;
			cosInner[o * nF + f] = rho - RADIUS[o] > 0 ? Math.cos(rho - RADIUS[o]) : 2;
		}
	}
	const cx = new Float64Array(nF);
	const cy = new Float64Array(nF);
	const cz = new Float64Array(nF);
	const normals = new Float64Array(12 * nF);
	const isCap = new Uint8Array(nF);
	geoms.forEach((g, f) => {
		[cx[f], cy[f], cz[f]] = g.centre;
		isCap[f] = g.normals.length === 0 ? 1 : 0;
		g.normals.forEach((n, k) => normals.set(n, 12 * f + 3 * k));
	});
	/** 0 outside, 1 partial with the centre outside, 2 inside, 3 partial with the centre inside. */
	const relation = (f: number, o: number, px: number, py: number, pz: number, sr: number): number => {
		const c = px * cx[f] + py * cy[f] + pz * cz[f];
		if (c < cosOuter[o * nF + f]) return 0;
		if (isCap[f]) {
			if (c >= cosInner[o * nF + f]) return 2;
			return c >= geoms[f].cosRadius ? 3 : 1;
		}
		let inside = true;
		let centreIn = true;
		const b = 12 * f;
		for (let k = 0; k < 12; k += 3) {
			const d = px * normals[b + k] + py * normals[b + k + 1] + pz * normals[b + k + 2];
			if (d < -sr) return 0;
			if (d < sr) inside = false;
			if (d < 0) centreIn = false;
		}
		return inside ? 2 : centreIn ? 3 : 1;
	};

	const centre = new Float64Array(3);
	const visit = (o: number, ipix: number, density: number, cand: Int32Array, nCand: number) => {
		pixelCentre(o, ipix, centre);
		const px = centre[0];
		const py = centre[1];
		const pz = centre[2];
		const mass = density * areas[o];
		const sr = SIN_RADIUS[o];
		const touching = scratch[o];
		let nT = 0;
		let allInside = true;
		let anyNew = false;
		let needed = 0;
		for (let k = 0; k < nCand; k++) {
			const f = cand[k];
			const rel = relation(f, o, px, py, pz, sr);
			if (rel === 0) continue;
			touching[nT++] = f;
			if (isNew[f]) anyNew = true;
			if (rel !== 2) {
				allInside = false;
				if (leafOrder[f] > needed) needed = leafOrder[f];
			}
		}
		// Nothing new may touch this pixel: what it adds is exactly nothing.
		if (!anyNew) return;
		if (allInside) {
			credit(mass, touching, nT);
			return;
		}
		if (o >= needed) {
			// An evaluation pixel: counted by its centre. It adds to the bound when no older footprint
			// certainly contains it and either an older one may cross it or no new one certainly contains it.
			leaves++;
			stamp++;
			let nIn = 0;
			let oldCertain = false;
			let oldPartial = false;
			let newCertain = false;
			for (let k = 0; k < nT; k++) {
				const f = touching[k];
				const g = groupOf[rankOf[f]];
				const rel = relation(f, o, px, py, pz, sr);
				if (isNew[f]) {
					newTouchStamp[g] = stamp;
					if (rel === 2) {
						newCertain = true;
						newCertainStamp[g] = stamp;
					}
				} else if (rel === 2) {
					oldCertain = true;
					oldCertainStamp[g] = stamp;
				} else {
					oldPartial = true;
					oldPartialStamp[g] = stamp;
				}
				if (rel >= 2) leafInside[nIn++] = f;
			}
			if (!oldCertain && (oldPartial || !newCertain)) uncertain += mass;
			for (let g = 0; g < nGroups; g++) {
				if (newTouchStamp[g] === stamp && oldCertainStamp[g] !== stamp && (oldPartialStamp[g] === stamp || newCertainStamp[g] !== stamp)) groupUncertain[g] += mass;
			}
			credit(mass, leafInside, nIn);
			return;
		}
		// Recursion only goes finer, so nothing overwrites scratch[o] while the children run.
		for (let k = 0; k < 4; k++) visit(o + 1, 4 * ipix + k, density, touching, nT);
	};

	const dens = map.probDensity;
	const at = (o: number, ipix: number, d: number) => {
		if (!(d > 0)) return;
		const cand = o >= BUCKET_ORDER ? buckets[Math.floor(ipix / 4 ** (o - BUCKET_ORDER))] : allLocal;
		if (cand.length === 0) return;
		visit(o, ipix, d, cand, cand.length);
	};
	if (onlyBuckets && !map.order && map.maxOrder >= BUCKET_ORDER) {
		// A flat map: go straight to the pixels of the coarse pixels wanted.
		const o = map.maxOrder;
		const per = 4 ** (o - BUCKET_ORDER);
		const ring = map.ordering === 'RING';
		for (let b = 0; b < nb; b++) {
			if (!onlyBuckets[b] || buckets[b].length === 0) continue;
			for (let ipix = b * per; ipix < (b + 1) * per; ipix++) at(o, ipix, dens[ring ? nestToRing(o, ipix) : ipix]);
		}
	} else {
		const px = { order: 0, ipix: 0 };
		for (let i = 0; i < map.size; i++) {
			const d = dens[i];
			if (!(d > 0)) continue;
			nestedPixel(map, i, px);
			at(px.order, px.ipix, d);
		}
	}
	return { uncertain, leaves };
}

/** Groups numbered by first appearance in rank order, extending `groupIds` (mutated). */
function numberGroups(ranked: ObservedFootprint[], groupIds: string[]): Int32Array {
	const index = new Map(groupIds.map((g, k) => [g, k]));
	return Int32Array.from(ranked, (f) => {
		let g = index.get(f.groupId);
		if (g === undefined) {
			g = groupIds.length;
			groupIds.push(f.groupId);
			index.set(f.groupId, g);
		}
		return g;
	});
}

/** The result a state stands for. */
function resultOf(state: CoverageState, options: CoverageOptions, leaves: number): Coverage {
	const fps = state.ranked;
	const groupIds = state.groupIds;
	const groupOf = numberGroups(fps, [...groupIds]);
	const point = (r: number, union: number): CurvePoint => ({
		id: fps[r].id,
		groupId: fps[r].groupId,
		timeMs: fps[r].timeMs,
		sinceMergerS: options.mergerTimeMs === undefined ? null : (fps[r].timeMs - options.mergerTimeMs) / 1000,
		union
	});
	const curve: CurvePoint[] = [];
	let total = 0;
	for (let r = 0; r < fps.length; r++) {
		total += state.firstOverall[r];
		curve.push(point(r, total));
	}
	const groupCurves: CurvePoint[][] = groupIds.map(() => []);
	const groupSums = new Float64Array(groupIds.length);
	for (let r = 0; r < fps.length; r++) {
		const g = groupOf[r];
		groupSums[g] += state.firstInGroup[r];
		groupCurves[g].push(point(r, groupSums[g]));
	}
	const groups: GroupCoverage[] = groupIds.map((groupId, g) => ({
		groupId,
		observations: groupCurves[g].length,
		union: groupSums[g],
		errorBound: state.groupUncertain[g],
		curve: groupCurves[g]
	}));
	const footprints: Coverage['footprints'] = new Array(fps.length);
	for (let r = 0; r < fps.length; r++) {
		const f = fps[r];
		footprints[state.inputOf[r]] = { id: f.id, groupId: f.groupId, timeMs: f.timeMs, probability: state.own[r] };
	}
	return {
		evaluationOrder: state.evaluationOrder,
		union: total,
		errorBound: state.uncertain,
		sumOfFootprints: state.own.reduce((a, b) => a + b, 0),
		footprints,
		groups,
		curve,
		leavesTested: leaves
	};
}

/**
 * Probability covered by the union of observed footprints, per group, and in time order.
 * Cost grows with the total edge length over the evaluation pixel side: 200 footprints of
 * 1–5° on a 196 608-pixel map take about 60–150 ms (measured in coverage.spec.ts).
 */
export function coverage(map: SkyMap, observed: ObservedFootprint[], options: CoverageOptions = {}): Coverage {
	return coverageWithState(map, observed, options).coverage;
}

/** `coverage`, with the state that `extendCoverage` takes to add later footprints. */
export function coverageWithState(map: SkyMap, observed: ObservedFootprint[], options: CoverageOptions = {}): { coverage: Coverage; state: CoverageState } {
	const { fixedOrder, across } = checkedOptions(options);
	// Work in time order: rank r is the r-th observation; groups are numbered by first appearance.
	const inputOf = Int32Array.from(observed.keys()).sort((a, b) => observed[a].timeMs - observed[b].timeMs || a - b);
	const ranked = Array.from(inputOf, (i) => observed[i]);
	const groupIds: string[] = [];
	const groupOf = numberGroups(ranked, groupIds);
	const leafOrder = Int32Array.from(ranked, (f) => leafOrderOf(f, fixedOrder, across));
	const acc: Accumulators = {
		ranked,
		groupOf,
		nGroups: groupIds.length,
		own: new Float64Array(ranked.length),
		firstOverall: new Float64Array(ranked.length),
		firstInGroup: new Float64Array(ranked.length),
		groupUncertain: new Float64Array(groupIds.length)
	};
	const { uncertain, leaves } = accumulate(map, acc, Int32Array.from(ranked.keys()), 0, (r) => leafOrder[r], null);
	const state: CoverageState = {
		evaluationOrderOption: fixedOrder ?? null,
		pixelsAcross: across,
		ranked,
		inputOf,
		own: acc.own,
		firstOverall: acc.firstOverall,
		firstInGroup: acc.firstInGroup,
		groupIds,
		groupUncertain: Array.from(acc.groupUncertain),
		uncertain,
		evaluationOrder: fixedOrder ?? (ranked.length ? Math.max(...leafOrder) : 0),
		extensions: 0
	};
	return { coverage: resultOf(state, options, leaves), state };
}

/**
 * The coverage of the footprints of `state` and `added` together, visiting only the map pixels
 * that the ADDED footprints may touch: there the older footprints are tested too, to know what
 * was covered already, and only the added ones are credited (their own probability, what they
 * cover first overall and first in their group). Cost grows with the added footprints' edges, not
 * with all of them. `state` is not changed; the returned state stands for both.
 *
 * Added footprints must not be earlier than the latest one in `state` (ties go after it, as
 * `coverage` orders ties by input): an earlier one changes every later curve point, and the
 * whole union is then computed afresh (`mode: 'recomputed'`), as it is when the options differ
 * from the state's.
 *
 * Agreement with `coverage` over all the footprints (old inputs then added): with a fixed
 * `evaluationOrder` both count the same evaluation pixels by their centres, so they agree to
 * rounding. With `pixelsAcross`, a pixel an added footprint crosses may be resolved finer than
 * the older footprints alone needed, so an older footprint's edge is counted at its own order in
 * the old part and may be counted again, at a finer order, as not yet covered: the two agree
 * within their error bounds.
 *
 * errorBound after an extension is a conservative upper bound: the old bound plus the mass of
 * the visited evaluation pixels where the added part is uncertain (no older footprint certainly
 * contains the pixel, and an older one may cross it or no added one certainly contains it);
 * evaluation pixels counted in both are counted twice. Likewise per group.
 */
export function extendCoverage(
	map: SkyMap,
	state: CoverageState,
	added: ObservedFootprint[],
	options: CoverageOptions = {}
): { coverage: Coverage; state: CoverageState; mode: ExtendMode } {
	const { fixedOrder, across } = checkedOptions(options);
	const nOld = state.ranked.length;
	if (added.length === 0) return { coverage: resultOf(state, options, 0), state, mode: 'unchanged' };
	const lastMs = nOld ? state.ranked[nOld - 1].timeMs : -Infinity;
	const sameOptions = (fixedOrder ?? null) === state.evaluationOrderOption && (fixedOrder !== undefined || across === state.pixelsAcross);
	if (!sameOptions || added.some((f) => !(f.timeMs >= lastMs))) {
		const inputs: ObservedFootprint[] = new Array(nOld);
		for (let r = 0; r < nOld; r++) inputs[state.inputOf[r]] = state.ranked[r];
		const full = coverageWithState(map, [...inputs, ...added], options);
		return { ...full, mode: 'recomputed' };
	}
	const addOrder = Int32Array.from(added.keys()).sort((a, b) => added[a].timeMs - added[b].timeMs || a - b);
	const ranked = [...state.ranked, ...Array.from(addOrder, (i) => added[i])];
	const n = ranked.length;
	const inputOf = new Int32Array(n);
	inputOf.set(state.inputOf);
	addOrder.forEach((i, k) => (inputOf[nOld + k] = nOld + i));
	const groupIds = [...state.groupIds];
	const groupOf = numberGroups(ranked, groupIds);
	const grow = (a: Float64Array) => {
		const out = new Float64Array(n);
		out.set(a);
		return out;
	};
	const groupUncertain = new Float64Array(groupIds.length);
	groupUncertain.set(state.groupUncertain);
	const acc: Accumulators = {
		ranked,
		groupOf,
		nGroups: groupIds.length,
		own: grow(state.own),
		firstOverall: grow(state.firstOverall),
		firstInGroup: grow(state.firstInGroup),
		groupUncertain
	};
	// The coarse pixels the added footprints may touch, and every footprint that may touch those.
	const touched = new Uint8Array(npix(BUCKET_ORDER));
	const addedGeoms = ranked.slice(nOld).map((f) => footprintGeometry(f));
	for (const g of addedGeoms) markBuckets(g, touched);
	const touchedList = [...touched.keys()].filter((b) => touched[b]);
	const local: number[] = [];
	for (let r = 0; r < nOld; r++) {
		const g = footprintGeometry(ranked[r]);
		if (touchedList.some((b) => discRelation(g, bucketCentre(b), RADIUS[BUCKET_ORDER], SIN_RADIUS[BUCKET_ORDER]) !== DISC_OUTSIDE)) local.push(r);
	}
	for (let r = nOld; r < n; r++) local.push(r);
	const leafOrder = (r: number) => leafOrderOf(ranked[r], fixedOrder, across);
	const { uncertain, leaves } = accumulate(map, acc, Int32Array.from(local), nOld, leafOrder, touched);
	let evaluationOrder = state.evaluationOrder;
	for (let r = nOld; r < n; r++) evaluationOrder = Math.max(evaluationOrder, leafOrder(r));
	const next: CoverageState = {
		evaluationOrderOption: state.evaluationOrderOption,
		pixelsAcross: state.pixelsAcross,
		ranked,
		inputOf,
		own: acc.own,
		firstOverall: acc.firstOverall,
		firstInGroup: acc.firstInGroup,
		groupIds,
		groupUncertain: Array.from(acc.groupUncertain),
		uncertain: state.uncertain + uncertain,
		evaluationOrder: fixedOrder ?? evaluationOrder,
		extensions: state.extensions + 1
	};
	return { coverage: resultOf(next, options, leaves), state: next, mode: 'extended' };
}

/** A ranked galaxy as `rankGalaxies` returns it (only the fields used here). */
export interface GalaxyProbability {
	id: string;
	ra: number;
	dec: number;
	probability: number;
}

export interface GalaxyCoverage {
	/** Σ probability of the galaxies given (1 when the whole ranked list is given). */
	totalProbability: number;
	observedProbability: number;
	/** observed / total: the fraction of the ranked galaxy probability observed. */
	fraction: number;
	observedCount: number;
	/** With footprints: per group, the probability of galaxies inside that group's footprints. */
	groups: { groupId: string; probability: number; fraction: number; count: number }[];
	/** With footprints: the observed probability after each observation in time order (galaxies only named count from the start). */
	curve: { id: string; timeMs: number; probability: number; fraction: number }[];
}

/**
 * The 3-D (galaxy-targeted) coverage: the ranked probability of galaxies observed, either named
 * directly (pointed at) or lying inside observed footprints (a galaxy counts once).
 */
export function galaxyCoverage(
	galaxies: GalaxyProbability[],
	observed: { galaxyIds?: Iterable<string>; footprints?: ObservedFootprint[] }
): GalaxyCoverage {
	const total = galaxies.reduce((s, g) => s + g.probability, 0);
	const frac = (p: number) => (total > 0 ? p / total : 0);
	const named = new Set(observed.galaxyIds ?? []);
	const fps = [...(observed.footprints ?? [])].map((f, i) => ({ f, i })).sort((a, b) => a.f.timeMs - b.f.timeMs || a.i - b.i);
	const geoms = fps.map(({ f }) => footprintGeometry(f));
	const firstRank = new Float64Array(fps.length);
	const groupProb = new Map<string, { probability: number; count: number }>();
	for (const { f } of fps) if (!groupProb.has(f.groupId)) groupProb.set(f.groupId, { probability: 0, count: 0 });
	let observedP = 0;
	let count = 0;
	let namedOnly = 0;
	for (const g of galaxies) {
		const isNamed = named.has(g.id);
		let first = -1;
		if (geoms.length) {
			const p: Vec3 = angToVector((90 - g.dec) * DEG, g.ra * DEG);
			const seen = new Set<string>();
			for (let r = 0; r < geoms.length; r++) {
				if (!containsVector(geoms[r], p)) continue;
				if (first < 0) first = r;
				const gid = fps[r].f.groupId;
				if (!seen.has(gid)) {
					seen.add(gid);
					const e = groupProb.get(gid)!;
					e.probability += g.probability;
					e.count++;
				}
			}
		}
		if (isNamed || first >= 0) {
			observedP += g.probability;
			count++;
		}
		if (first >= 0) firstRank[first] += g.probability;
		else if (isNamed) namedOnly += g.probability;
	}
	let running = namedOnly;
	const curve = fps.map(({ f }, r) => {
		running += firstRank[r];
		return { id: f.id, timeMs: f.timeMs, probability: running, fraction: frac(running) };
	});
	return {
		totalProbability: total,
		observedProbability: observedP,
		fraction: frac(observedP),
		observedCount: count,
		groups: [...groupProb].map(([groupId, e]) => ({ groupId, probability: e.probability, fraction: frac(e.probability), count: e.count })),
		curve
	};
}
