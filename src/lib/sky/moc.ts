/**
 * One in-memory form for HEALPix probability sky maps, read from either
 *  - a multi-order map: ORDERING = 'NUNIQ', columns UNIQ + PROBDENSITY (sr⁻¹), or
 *  - a flat map: ORDERING = 'RING' | 'NESTED', probability per pixel (column PROB or the first column),
 * each with optional DISTMU / DISTSIGMA / DISTNORM columns (Singer et al. 2016 ansatz).
 * Keyword and column names follow the HEALPix FITS conventions (Górski et al. 2005) and
 * the multi-order coverage scheme of the IVOA MOC 2.0 recommendation.
 */
import { FitsError, keyword, readBinTable, readFits, type Column, type FitsFile, type ReadFitsOptions } from './fits.ts';
import {
	MAX_NESTED_ORDER,
	MAX_RING_ORDER,
	orderOfNside,
	pixelAreaSr,
	radecToNest,
	radecToRing,
	ringToNest,
	uniqOrderBig,
	uniqToOrderPix
} from './coords.ts';

const UNIQ_BASE = Float64Array.from({ length: 32 }, (_, o) => 4 * 4 ** o);
const LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

export type Ordering = 'NUNIQ' | 'NESTED' | 'RING';

export interface SkyMap {
	ordering: Ordering;
	/** Number of pixels (table rows × repeat). */
	size: number;
	/** Per-pixel order for NUNIQ maps; null for flat maps (every pixel is at `maxOrder`). */
	order: Uint8Array | null;
	/** Per-pixel nested index at its order for NUNIQ maps; null for flat maps (the index is the position). */
	ipix: Float64Array | null;
	/** Probability density per steradian, normalised so that Σ density·area = 1. */
	probDensity: Float64Array;
	distMu: Float64Array | null;
	distSigma: Float64Array | null;
	distNorm: Float64Array | null;
	minOrder: number;
	maxOrder: number;
	/** Σ probability as read, before cleaning and normalisation. */
	probabilitySumRaw: number;
	/** Sky fraction covered by the pixels (1 for a complete map). */
	coverage: number;
	warnings: string[];
	/** Lazily built lookup for NUNIQ maps: pixel indices sorted by first nested index at maxOrder. */
	lookup?: { start: Float64Array; span: Float64Array; pixel: Uint32Array };
}

export interface ReadSkyMapOptions extends ReadFitsOptions {
	/** Skip the distance columns (saves memory for 2-D work). */
	skipDistance?: boolean;
}

/** Relative deviation of the total probability from 1 above which a warning is raised. */
export const PROBABILITY_SUM_TOLERANCE = 0.01;

export function pixelAreaOf(map: SkyMap, i: number): number {
	return pixelAreaSr(map.order ? map.order[i] : map.maxOrder);
}

/** Solid angle per order, indexable by order. */
export function areaTable(): Float64Array {
	const t = new Float64Array(MAX_NESTED_ORDER + 1);
	for (let o = 0; o <= MAX_NESTED_ORDER; o++) t[o] = pixelAreaSr(o);
	return t;
}

function toFloat64(col: Column): Float64Array {
	const d = col.data;
	if (d instanceof Float64Array) return d;
	if (Array.isArray(d)) throw new FitsError(`column ${col.name} holds text, expected numbers`);
	const out = new Float64Array(d.length);
	if (d instanceof BigInt64Array || d instanceof BigUint64Array) {
		for (let i = 0; i < d.length; i++) out[i] = Number(d[i]);
	} else {
		out.set(d as ArrayLike<number>);
	}
	return out;
}

function findHealpixTable(file: FitsFile) {
	const hdu = file.hdus.find((h) => h.kind === 'BINTABLE');
	if (!hdu) throw new FitsError('no BINTABLE extension: not a HEALPix sky map');
	return hdu;
}

/** Replace NaN/negative densities by 0, normalise, and record what was done. */
function clean(density: Float64Array, areaOf: (i: number) => number, warnings: string[], uniformArea: number | null) {
	let bad = 0;
	let sum = 0;
	for (let i = 0; i < density.length; i++) {
		const v = density[i];
		if (!(v >= 0) || v === Infinity) {
			density[i] = 0;
			bad++;
		} else if (uniformArea === null) sum += v * areaOf(i);
		else sum += v;
	}
	if (uniformArea !== null) sum *= uniformArea;
	if (bad > 0) warnings.push(`${bad} pixel(s) had NaN, infinite or negative probability; set to 0`);
	if (!(sum > 0)) throw new FitsError('the map holds no probability (all pixels zero or invalid)');
	if (Math.abs(sum - 1) > PROBABILITY_SUM_TOLERANCE) {
		warnings.push(`total probability was ${sum.toPrecision(6)}, not 1; normalised`);
	}
	const k = 1 / sum;
	for (let i = 0; i < density.length; i++) density[i] *= k;
	return sum;
}

/**
 * Flat map, probability per pixel → density per sr in place: one pass zeroes NaN, infinite and
 * negative values and sums the rest; a second scales by 1 / (sum × pixel area). Same outcome as
 * `clean` after dividing by the pixel area, without a second array.
 */
function cleanFlatInPlace(values: Float64Array, perSr: number, warnings: string[]): number {
	let bad = 0;
	let sum = 0;
	const n = values.length;
	for (let i = 0; i < n; i++) {
		const v = values[i];
		if (v >= 0 && v !== Infinity) sum += v;
		else {
			values[i] = 0;
			bad++;
		}
	}
	if (bad > 0) warnings.push(`${bad} pixel(s) had NaN, infinite or negative probability; set to 0`);
	if (!(sum > 0)) throw new FitsError('the map holds no probability (all pixels zero or invalid)');
	if (Math.abs(sum - 1) > PROBABILITY_SUM_TOLERANCE) {
		warnings.push(`total probability was ${sum.toPrecision(6)}, not 1; normalised`);
	}
	const k = perSr / sum;
	for (let i = 0; i < n; i++) values[i] *= k;
	return sum;
}

function distanceColumns(table: ReturnType<typeof readBinTable>, size: number, warnings: string[]) {
	const mu = table.column('DISTMU');
	const sigma = table.column('DISTSIGMA');
	const norm = table.column('DISTNORM');
	if (!mu && !sigma && !norm) return { distMu: null, distSigma: null, distNorm: null };
	if (!mu || !sigma || !norm) {
		warnings.push('distance columns incomplete (need DISTMU, DISTSIGMA and DISTNORM); distance ignored');
		return { distMu: null, distSigma: null, distNorm: null };
	}
	const cols = [mu, sigma, norm].map(toFloat64);
	for (const c of cols) if (c.length !== size) throw new FitsError('distance column length differs from the probability column');
	return { distMu: cols[0], distSigma: cols[1], distNorm: cols[2] };
}

/** Parse FITS bytes (optionally gzip) into a SkyMap. Throws FitsError with a one-line reason. */
export function readSkyMap(bytes: Uint8Array, options: ReadSkyMapOptions = {}): SkyMap {
	const file = readFits(bytes, options);
	const hdu = findHealpixTable(file);
	const orderingValue = keyword(file, hdu, 'ORDERING');
	if (typeof orderingValue !== 'string') throw new FitsError('missing keyword ORDERING (expected NUNIQ, RING or NESTED)');
	const ordering = orderingValue.trim().toUpperCase();
	const indexing = keyword(file, hdu, 'INDXSCHM');
	if (typeof indexing === 'string' && indexing.trim().toUpperCase() === 'EXPLICIT' && ordering !== 'NUNIQ') {
		throw new FitsError('partial-sky maps (INDXSCHM = EXPLICIT) are not supported');
	}
	const distNames = options.skipDistance ? [] : ['DISTMU', 'DISTSIGMA', 'DISTNORM'];
	const warnings: string[] = [];

	if (ordering === 'NUNIQ') {
		const table = readBinTable(file, hdu, ['UNIQ', 'PROBDENSITY', 'PROB', ...distNames]);
		const uniqCol = table.column('UNIQ');
		if (!uniqCol) throw new FitsError('NUNIQ map has no UNIQ column');
		const densCol = table.column('PROBDENSITY');
		const probCol = densCol ? undefined : table.column('PROB');
		if (!densCol && !probCol) throw new FitsError('NUNIQ map has no PROBDENSITY column');
		const size = table.rows * uniqCol.repeat;
		const order = new Uint8Array(size);
		const ipix = new Float64Array(size);
		const u = uniqCol.data;
		let minOrder = 99;
		let maxOrder = -1;
		const setPixel = (i: number, value: number, bitLength: number) => {
			// uniq ∈ [4^(o+1), 4^(o+2)) has bit length 2o+3 or 2o+4.
			const o = (bitLength - 3) >> 1;
			if (o > MAX_NESTED_ORDER) {
				throw new FitsError(`row ${i + 1}: HEALPix order ${o} is above the supported maximum ${MAX_NESTED_ORDER}`);
			}
			order[i] = o;
			ipix[i] = value - UNIQ_BASE[o];
			if (o < minOrder) minOrder = o;
			if (o > maxOrder) maxOrder = o;
		};
		if (u instanceof BigInt64Array || u instanceof BigUint64Array) {
			// Read the 64-bit integers as 32-bit halves: exact and far faster than BigInt arithmetic.
			const w = new Uint32Array(u.buffer, u.byteOffset, 2 * size);
			const H = LITTLE_ENDIAN ? 1 : 0;
			for (let i = 0; i < size; i++) {
				const hi = w[2 * i + H];
				const lo = w[2 * i + 1 - H];
				if (hi >= 0x200000 || (hi === 0 && lo < 4)) {
					const big = BigInt(u[i]);
					throw new FitsError(
						big < 4n
							? `row ${i + 1}: invalid UNIQ value ${big}`
							: `row ${i + 1}: HEALPix order ${uniqOrderBig(big)} is above the supported maximum ${MAX_NESTED_ORDER}`
					);
				}
				setPixel(i, hi * 4294967296 + lo, hi > 0 ? 64 - Math.clz32(hi) : 32 - Math.clz32(lo));
			}
		} else if (Array.isArray(u)) {
			throw new FitsError('UNIQ column holds text');
		} else {
			for (let i = 0; i < size; i++) {
				const value = (u as Float64Array)[i];
				if (!Number.isSafeInteger(value) || value < 4) throw new FitsError(`row ${i + 1}: invalid UNIQ value ${value}`);
				setPixel(i, value, uniqToOrderPix(value).order * 2 + 3);
			}
		}
		if (size === 0) throw new FitsError('the map has no pixels');
		const areas = areaTable();
		let density: Float64Array;
		// Column buffers are fresh copies from the reader, so cleaning in place is safe.
		if (densCol) density = toFloat64(densCol);
		else {
			density = toFloat64(probCol!);
			for (let i = 0; i < size; i++) density[i] /= areas[order[i]];
		}
		let covered = 0;
		for (let i = 0; i < size; i++) covered += areas[order[i]];
		const coverage = covered / (4 * Math.PI);
		if (Math.abs(coverage - 1) > 1e-9) warnings.push(`pixels cover ${(coverage * 100).toFixed(4)}% of the sky, not 100%`);
		const probabilitySumRaw = clean(density, (i) => areas[order[i]], warnings, null);
		return {
			ordering: 'NUNIQ',
			size,
			order,
			ipix,
			probDensity: density,
			...distanceColumns(table, size, warnings),
			minOrder,
			maxOrder,
			probabilitySumRaw,
			coverage,
			warnings
		};
	}

	if (ordering !== 'RING' && ordering !== 'NESTED') {
		throw new FitsError(`unsupported ORDERING '${orderingValue}' (expected NUNIQ, RING or NESTED)`);
	}
	const table = readBinTable(file, hdu);
	const probCol = table.column('PROB') ?? table.columns[0];
	if (!probCol) throw new FitsError('flat map has no columns');
	const size = table.rows * probCol.repeat;
	const nsideValue = keyword(file, hdu, 'NSIDE');
	let order: number | null;
	if (nsideValue === undefined) {
		order = orderOfNside(Math.round(Math.sqrt(size / 12)));
		if (order === null || 12 * 4 ** order !== size) throw new FitsError('missing keyword NSIDE and the pixel count is not 12·nside²');
		warnings.push('NSIDE keyword missing; inferred from the pixel count');
	} else {
		order = typeof nsideValue === 'number' ? orderOfNside(nsideValue) : null;
		if (order === null) throw new FitsError(`NSIDE = ${String(nsideValue)} is not a power of two`);
		if (12 * 4 ** order !== size) {
			throw new FitsError(`NSIDE = ${nsideValue} needs ${12 * 4 ** order} pixels but the table holds ${size}`);
		}
	}
	const maxAllowed = ordering === 'RING' ? MAX_RING_ORDER : MAX_NESTED_ORDER;
	if (order > maxAllowed) throw new FitsError(`HEALPix order ${order} is above the supported maximum ${maxAllowed}`);
	const area = pixelAreaSr(order);
	const raw = probCol.data;
	if (Array.isArray(raw)) throw new FitsError(`column ${probCol.name} holds text`);
	let density: Float64Array;
	let probabilitySumRaw: number;
	if (raw instanceof Float64Array) {
		// The column is the reader's fresh copy or a view into bytes the caller gave up: probability
		// per pixel becomes density per sr where it lies, in two passes and no 100 MB temporary.
		density = raw;
		probabilitySumRaw = cleanFlatInPlace(density, 1 / area, warnings);
	} else {
		density = new Float64Array(size);
		const inv = 1 / area;
		if (raw instanceof BigInt64Array || raw instanceof BigUint64Array) {
			for (let i = 0; i < size; i++) density[i] = Number(raw[i]) * inv;
		} else {
			const r = raw as Float32Array;
			for (let i = 0; i < size; i++) density[i] = r[i] * inv;
		}
		probabilitySumRaw = clean(density, () => area, warnings, area);
	}
	const dist = options.skipDistance
		? { distMu: null, distSigma: null, distNorm: null }
		: distanceColumns(table, size, warnings);
	return {
		ordering,
		size,
		order: null,
		ipix: null,
		probDensity: density,
		...dist,
		minOrder: order,
		maxOrder: order,
		probabilitySumRaw,
		coverage: 1,
		warnings
	};
}

function buildLookup(map: SkyMap) {
	const order = map.order!;
	const ipix = map.ipix!;
	const n = map.size;
	const start = new Float64Array(n);
	const span = new Float64Array(n);
	for (let i = 0; i < n; i++) {
		const f = 4 ** (map.maxOrder - order[i]);
		start[i] = ipix[i] * f;
		span[i] = f;
	}
	const pixel = new Uint32Array(n);
	for (let i = 0; i < n; i++) pixel[i] = i;
	pixel.sort((a, b) => start[a] - start[b]);
	const s = new Float64Array(n);
	const w = new Float64Array(n);
	for (let k = 0; k < n; k++) {
		s[k] = start[pixel[k]];
		w[k] = span[pixel[k]];
	}
	return { start: s, span: w, pixel };
}

/**
 * The HEALPix order and NESTED index of row `i`: stored per row in a multi-order map; `maxOrder`
 * and the row (converted from RING when needed) in a flat one. Written into `out` so that loops
 * over every pixel allocate nothing.
 */
export function nestedPixel(map: SkyMap, i: number, out: { order: number; ipix: number }): void {
	if (map.order) {
		out.order = map.order[i];
		out.ipix = map.ipix![i];
	} else {
		out.order = map.maxOrder;
		out.ipix = map.ordering === 'RING' ? ringToNest(map.maxOrder, i) : i;
	}
}

/** Index of the map pixel containing RA/Dec (degrees), or -1 where a partial map has no pixel. */
export function pixelAt(map: SkyMap, raDeg: number, decDeg: number): number {
	if (map.ordering === 'RING') return radecToRing(map.maxOrder, raDeg, decDeg);
	const p = radecToNest(map.maxOrder, raDeg, decDeg);
	if (map.ordering === 'NESTED') return p;
	map.lookup ??= buildLookup(map);
	const { start, span, pixel } = map.lookup;
	let lo = 0;
	let hi = start.length - 1;
	if (p < start[0]) return -1;
	while (lo < hi) {
		const mid = (lo + hi + 1) >> 1;
		if (start[mid] <= p) lo = mid;
		else hi = mid - 1;
	}
	return p < start[lo] + span[lo] ? pixel[lo] : -1;
}
