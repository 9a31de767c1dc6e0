/**
 * Credible regions of a HEALPix probability map.
 *
 * The credible region at level L is the smallest set of pixels, taken densest first,
 * whose probability reaches L (the "greedy" or highest-posterior-density region; common
 * practice, e.g. Singer et al. 2016 ApJL 829 L15 §2). Its area is the summed solid angle
 * of those pixels, including the pixel at which the running sum first reaches L.
 * The credible level (searched probability) of a direction is the probability held by all
 * pixels strictly denser than the pixel containing it.
 *
 * The densest-first threshold is found without sorting the map: a radix selection on the
 * IEEE-754 bit patterns of the (non-negative) densities, whose unsigned order equals their
 * numeric order, narrows the crossing to one bucket in at most four 16-bit passes; only that
 * bucket's pixels are sorted.
 */
import { nestToAng, nestToRadec, pixelAreaSr, ringToAng, SR_TO_DEG2, thetaPhiToRadec } from './coords.ts';
import { areaTable, nestedPixel, pixelAt, type SkyMap } from './moc.ts';

export interface CredibleRegion {
	/** Requested level, 0 < level ≤ 1. */
	level: number;
	areaSr: number;
	areaDeg2: number;
	/** Density (sr⁻¹) of the last pixel taken into the region. */
	densityThresholdPerSr: number;
	pixelCount: number;
}

const LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;
const HI = LITTLE_ENDIAN ? 1 : 0;
const LO = 1 - HI;
const BUCKETS = 65536;
const SORT_BELOW = 4096;

function keyAt(bits: Uint32Array, i: number, pass: number): number {
	switch (pass) {
		case 0:
			return bits[2 * i + HI] >>> 16;
		case 1:
			return bits[2 * i + HI] & 0xffff;
		case 2:
			return bits[2 * i + LO] >>> 16;
		default:
			return bits[2 * i + LO] & 0xffff;
	}
}

interface MassAccess {
	density: Float64Array;
	bits: Uint32Array;
	/** Per-pixel area, or null when every pixel has `uniformArea`. */
	order: Uint8Array | null;
	areas: Float64Array;
	uniformArea: number;
}

function access(map: SkyMap): MassAccess {
	const d = map.probDensity;
	return {
		density: d,
		bits: new Uint32Array(d.buffer, d.byteOffset, d.length * 2),
		order: map.order,
		areas: areaTable(),
		uniformArea: pixelAreaSr(map.maxOrder)
	};
}

interface Histogram {
	mass: Float64Array;
	area: Float64Array;
	count: Uint32Array;
}

function histogram(a: MassAccess, pass: number, candidates: Uint32Array | null): Histogram {
	const mass = new Float64Array(BUCKETS);
	const area = new Float64Array(BUCKETS);
	const count = new Uint32Array(BUCKETS);
	const { density, bits, order, areas, uniformArea } = a;
	const n = candidates ? candidates.length : density.length;
	if (order === null) {
		// Flat map: accumulate density, scale by the common pixel area afterwards.
		for (let k = 0; k < n; k++) {
			const i = candidates ? candidates[k] : k;
			const key = keyAt(bits, i, pass);
			mass[key] += density[i];
			count[key]++;
		}
		for (let b = 0; b < BUCKETS; b++) {
			mass[b] *= uniformArea;
			area[b] = count[b] * uniformArea;
		}
	} else {
		for (let k = 0; k < n; k++) {
			const i = candidates ? candidates[k] : k;
			const key = keyAt(bits, i, pass);
			const s = areas[order[i]];
			mass[key] += density[i] * s;
			area[key] += s;
			count[key]++;
		}
	}
	return { mass, area, count };
}

function select(a: MassAccess, level: number, top: Histogram, total: number): CredibleRegion {
	const target = level * total;
	let massAbove = 0;
	let areaAbove = 0;
	let countAbove = 0;
	let candidates: Uint32Array | null = null;
	let hist = top;
	for (let pass = 0; pass < 4; pass++) {
		// Bucket 0 of pass 0 holds the zero-density pixels; they never raise the sum.
		let b = BUCKETS - 1;
		for (; b >= 0; b--) {
			if (massAbove + hist.mass[b] >= target && hist.count[b] > 0) break;
			massAbove += hist.mass[b];
			areaAbove += hist.area[b];
			countAbove += hist.count[b];
		}
		if (b < 0) {
			// Rounding left the target just out of reach: the region is every pixel with probability.
			return finish(level, areaAbove, countAbove, lowestPositive(a));
		}
		const next = new Uint32Array(hist.count[b]);
		let m = 0;
		const n = candidates ? candidates.length : a.density.length;
		for (let k = 0; k < n; k++) {
			const i = candidates ? candidates[k] : k;
			if (keyAt(a.bits, i, pass) === b) next[m++] = i;
		}
		candidates = next;
		if (candidates.length <= SORT_BELOW || pass === 3) break;
		hist = histogram(a, pass + 1, candidates);
	}
	const c = Array.from(candidates!);
	const d = a.density;
	c.sort((x, y) => d[y] - d[x] || x - y);
	let mass = massAbove;
	let areaSr = areaAbove;
	let count = countAbove;
	for (const i of c) {
		const s = a.order ? a.areas[a.order[i]] : a.uniformArea;
		mass += d[i] * s;
		areaSr += s;
		count++;
		if (mass >= target) return finish(level, areaSr, count, d[i]);
	}
	return finish(level, areaSr, count, d[c[c.length - 1]]);
}

function lowestPositive(a: MassAccess): number {
	let m = Infinity;
	for (const v of a.density) if (v > 0 && v < m) m = v;
	return m;
}

function finish(level: number, areaSr: number, pixelCount: number, threshold: number): CredibleRegion {
	return { level, areaSr, areaDeg2: areaSr * SR_TO_DEG2, densityThresholdPerSr: threshold, pixelCount };
}

/**
 * Credible regions (greedy, densest pixels first) at each level in `levels` (0 < L ≤ 1).
 * Exact: the same pixel set a full descending sort and cumulative sum would give.
 */
export function credibleRegions(map: SkyMap, levels: number[]): CredibleRegion[] {
	for (const l of levels) if (!(l > 0 && l <= 1)) throw new RangeError(`credible level ${l} is outside (0, 1]`);
	const a = access(map);
	const top = histogram(a, 0, null);
	let total = 0;
	for (let b = 0; b < BUCKETS; b++) total += top.mass[b];
	return levels.map((l) => select(a, l, top, total));
}

/**
 * Credible level of each density value: the probability held by all pixels strictly denser.
 * One pass over the map with a binary search among the sorted queries per pixel.
 */
export function credibleLevelsOfDensities(map: SkyMap, densities: ArrayLike<number>): Float64Array {
	const q = Float64Array.from(densities).sort();
	const m = q.length;
	const bucket = new Float64Array(m + 1);
	const d = map.probDensity;
	const areas = areaTable();
	const uniform = pixelAreaSr(map.maxOrder);
	const order = map.order;
	for (let i = 0; i < d.length; i++) {
		const v = d[i];
		if (v === 0) continue;
		// c = number of queries strictly below v
		let lo = 0;
		let hi = m;
		while (lo < hi) {
			const mid = (lo + hi) >> 1;
			if (q[mid] < v) lo = mid + 1;
			else hi = mid;
		}
		bucket[lo] += order ? v * areas[order[i]] : v * uniform;
	}
	// level(q_k) = Σ_{c > k} bucket[c]
	const levelSorted = new Float64Array(m);
	let acc = 0;
	for (let k = m - 1; k >= 0; k--) {
		acc += bucket[k + 1];
		levelSorted[k] = acc;
	}
	const out = new Float64Array(densities.length);
	for (let j = 0; j < densities.length; j++) {
		const v = densities[j];
		let lo = 0;
		let hi = m;
		while (lo < hi) {
			const mid = (lo + hi) >> 1;
			if (q[mid] < v) lo = mid + 1;
			else hi = mid;
		}
		out[j] = Math.min(1, levelSorted[lo]);
	}
	return out;
}

/** Credible level of one direction (RA/Dec degrees); 1 where a partial map has no pixel. */
export function credibleLevelAt(map: SkyMap, raDeg: number, decDeg: number): number {
	const i = pixelAt(map, raDeg, decDeg);
	if (i < 0) return 1;
	return credibleLevelsOfDensities(map, [map.probDensity[i]])[0];
}

/** Centre of the densest pixel. */
export function peak(map: SkyMap): { ra: number; dec: number; pixel: number } {
	const d = map.probDensity;
	let best = 0;
	for (let i = 1; i < d.length; i++) if (d[i] > d[best]) best = i;
	return { ...pixelCentre(map, best), pixel: best };
}

/** Centre (RA/Dec degrees) of map pixel i. */
export function pixelCentre(map: SkyMap, i: number): { ra: number; dec: number } {
	if (map.ordering === 'NUNIQ') return nestToRadec(map.order![i], map.ipix![i]);
	const { theta, phi } = map.ordering === 'RING' ? ringToAng(map.maxOrder, i) : nestToAng(map.maxOrder, i);
	return thetaPhiToRadec(theta, phi);
}

/** Upper bound on the count of nested indices a region query may return. */
export const MAX_REGION_PIXELS = 50_000_000;

/**
 * Sorted, distinct nested pixel indices at `order` covering the credible region at `level`
 * (every map pixel with density ≥ the region's threshold). Coarser map pixels expand to all
 * their children; finer ones collapse to their parent, so the cover is conservative.
 */
export function regionPixels(map: SkyMap, level: number, order: number): Float64Array {
	const [region] = credibleRegions(map, [level]);
	const t = region.densityThresholdPerSr;
	const d = map.probDensity;
	const out: number[] = [];
	const px = { order: 0, ipix: 0 };
	for (let i = 0; i < d.length; i++) {
		if (!(d[i] >= t)) continue;
		nestedPixel(map, i, px);
		const o = px.order;
		const p = px.ipix;
		if (o >= order) out.push(Math.floor(p / 4 ** (o - order)));
		else {
			const f = 4 ** (order - o);
			if (out.length + f > MAX_REGION_PIXELS) throw new RangeError(`region at order ${order} exceeds ${MAX_REGION_PIXELS} pixels`);
			for (let k = 0; k < f; k++) out.push(p * f + k);
		}
		if (out.length > MAX_REGION_PIXELS) throw new RangeError(`region at order ${order} exceeds ${MAX_REGION_PIXELS} pixels`);
	}
	const sorted = Float64Array.from(out).sort();
	let w = 0;
	for (let k = 0; k < sorted.length; k++) if (k === 0 || sorted[k] !== sorted[w - 1]) sorted[w++] = sorted[k];
	return sorted.slice(0, w);
}

/** Whether a nested index at the region's order lies in a sorted region list (binary search). */
export function regionContains(sortedPixels: Float64Array, ipix: number): boolean {
	let lo = 0;
	let hi = sortedPixels.length - 1;
	while (lo <= hi) {
		const mid = (lo + hi) >> 1;
		const v = sortedPixels[mid];
		if (v === ipix) return true;
		if (v < ipix) lo = mid + 1;
		else hi = mid - 1;
	}
	return false;
}
