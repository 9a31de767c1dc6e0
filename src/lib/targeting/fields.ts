/**
 * A fixed tiling of the sky for one field of view, and the probability each field encloses.
 *
 * Footprints. A rectangle w × h is the gnomonic (tangent-plane) rectangle |ξ| ≤ tan(w/2),
 * |η| ≤ tan(h/2) about the field centre, sides along RA and Dec at the centre, with standard
 * coordinates (Calabretta & Greisen 2002, A&A 395, 1077, the TAN projection):
 *   D = sin δ sin δc + cos δ cos δc cos Δα,  ξ = cos δ sin Δα / D,  η = (sin δ cos δc − cos δ sin δc cos Δα) / D.
 * A circle of diameter d is the cap of angular radius d/2. It is tiled through its inscribed
 * gnomonic square, of side s with tan(s/2) = tan(d/2)/√2 (the square's corners lie on the cap).
 *
 * Tiling. Rows of constant Dec (bands), mirror-symmetric about the equator. Each band is covered
 * by n fields at RA (j + ½)·360/n. A band's field count starts from n₀ = ⌈360 cos δ_near / (w − overlap)⌉
 * (δ_near: the band edge nearest the equator, where a field spans the fewest degrees of RA) and
 * is raised while that lowers fields per steradian: going poleward, a parallel curves away from
 * the footprint's straight top edge, so a band of n fields can be only as tall as its corners
 * allow (found by bisection). The cell of field j (RA ± 180/n about its centre, the band in Dec)
 * must lie inside the footprint shrunk by the overlap. No gaps, by this argument: every direction
 * lies in exactly one cell; on a cell, for fixed δ |ξ| grows with |Δα|, for fixed Δα both ξ and η
 * are monotonic in tan δ (dη/d tan δ = cos Δα / D′² > 0; ξ = sin Δα / (tan δ sin δc + cos δc cos Δα)),
 * and η is monotonic in cos Δα for fixed δ; so the extremes of ξ and η over the cell are at its
 * corners or on its central meridian, the six points checked for every band. Also tested by sampling.
 * A northern band's centre sits half a (shrunk) field height above its lower edge; the id is `W{w}x{h}-R{row}-F{field}`
 * (`C{d}-…` for circles), rows from the south pole, fields eastward from RA 0, zero-padded.
 *
 * Probability. The map is evaluated on points: every map pixel with density ≥ the threshold of the
 * credible region at `level` (default 0.999) contributes its centre, or, when coarser than the
 * evaluation order, the centres of its children at that order (the map is piecewise constant, so
 * this is the map itself, finer). The evaluation order makes pixels at most a tenth of the field's
 * smaller side over 20. A field's probability is the sum over points inside its footprint. Error bound per
 * field: the probability of points within one pixel radius of the footprint's edge
 * (`boundaryProbability`), since only pixels the edge crosses can be counted wrongly.
 * Each point also belongs to exactly one cell, so the cell probabilities add up to the probability
 * evaluated; `cumulative` is the union probability of the fields ranked so far.
 */
import { areaTable, credibleRegions, nestedPixel, nestToRadec, npix, SPHERE_DEG2, type SkyMap } from '../sky/index.ts';

const DEG = Math.PI / 180;

export type FieldOfView = { shape: 'rectangle'; widthDeg: number; heightDeg: number } | { shape: 'circle'; diameterDeg: number };

export interface TilingOptions {
	/** Minimum overlap between neighbouring fields, degrees (default 2% of the field's smaller side). */
	overlapDeg?: number;
}

export interface TilingRow {
	row: number;
	decLoDeg: number;
	decHiDeg: number;
	decCentreDeg: number;
	count: number;
}

export interface Tiling {
	fov: FieldOfView;
	overlapDeg: number;
	prefix: string;
	rows: TilingRow[];
	/** Index of the first field of each row in the flat field list. */
	rowStart: number[];
	fieldCount: number;
	/** Half-tangents of the rectangle actually tiled (the inscribed square for circles). */
	tanHalfW: number;
	tanHalfH: number;
	/** Footprint circumradius, radians. */
	circumradiusRad: number;
	rowDigits: number;
	fieldDigits: number;
}

export interface SkyField {
	id: string;
	row: number;
	index: number;
	raDeg: number;
	decDeg: number;
}

function validate(fov: FieldOfView): void {
	const sizes = fov.shape === 'rectangle' ? [fov.widthDeg, fov.heightDeg] : [fov.diameterDeg];
	for (const s of sizes) if (!(s > 0.05 && s <= 30)) throw new RangeError(`field size ${s}° is outside (0.05, 30]`);
}

/** Rectangle tiled for a field of view: itself, or a circle's inscribed gnomonic square. */
function tiledRectangle(fov: FieldOfView): { w: number; h: number } {
	if (fov.shape === 'rectangle') return { w: fov.widthDeg, h: fov.heightDeg };
	const s = (2 * Math.atan(Math.tan((fov.diameterDeg / 2) * DEG) / Math.SQRT2)) / DEG;
	return { w: s, h: s };
}

/** Standard coordinates of (Δα, δ) about a centre at declination δc (radians); null behind the tangent plane. */
function standard(dAlpha: number, dec: number, decC: number): { xi: number; eta: number } | null {
	const sd = Math.sin(dec);
	const cd = Math.cos(dec);
	const s0 = Math.sin(decC);
	const c0 = Math.cos(decC);
	const ca = Math.cos(dAlpha);
	const D = sd * s0 + cd * c0 * ca;
	if (!(D > 1e-12)) return null;
	return { xi: (cd * Math.sin(dAlpha)) / D, eta: (sd * c0 - cd * s0 * ca) / D };
}

function fmt(v: number): string {
	return Number.isInteger(v * 10) ? v.toFixed(1) : String(Number(v.toFixed(3)));
}

/** Build the tiling for a field of view (deterministic). */
export function tileSky(fov: FieldOfView, options: TilingOptions = {}): Tiling {
	validate(fov);
	const { w, h } = tiledRectangle(fov);
	const overlap = options.overlapDeg ?? 0.02 * Math.min(w, h);
	if (!(overlap >= 0 && overlap < 0.5 * Math.min(w, h))) throw new RangeError(`overlap ${overlap}° must be in [0, half the field size)`);
	const tw = Math.tan(((w - overlap) / 2) * DEG);
	const th = Math.tan(((h - overlap) / 2) * DEG);
	const hh = ((h - overlap) / 2) * DEG;
	const fits = (n: number, lo: number, hi: number, centre: number) => {
		const a = (Math.PI / n) * (1 + 1e-12);
		for (const da of [0, a]) {
			for (const d of [lo, hi]) {
				const p = standard(da, d, centre);
				if (!p || Math.abs(p.xi) > tw || Math.abs(p.eta) > th) return false;
			}
		}
		return true;
	};
	// Tallest band above `lo` (centre fixed) that n fields cover, by bisection on the top edge.
	const tallest = (n: number, lo: number, centre: number, cap: number) => {
		if (!fits(n, lo, lo, centre)) return lo;
		if (fits(n, lo, cap, centre)) return cap;
		let a = lo;
		let b = cap;
		for (let k = 0; k < 60; k++) {
			const m = 0.5 * (a + b);
			if (fits(n, lo, m, centre)) a = m;
			else b = m;
		}
		return a;
	};
	const nMin = (lo: number, centre: number) => {
		let n = Math.max(3, Math.ceil((2 * Math.PI * Math.cos(Math.min(Math.abs(lo), Math.PI / 2))) / ((w - overlap) * DEG)));
		while (!fits(n, lo, lo, centre)) n++;
		return n;
	};
	// Northern bands, from the equator band (symmetric about 0) to the pole; the south mirrors them.
	// For each band the field count n minimises fields per steradian, n / (sin δ₂ − sin δ₁).
	type Band = { lo: number; hi: number; centre: number; n: number };
	const north: Band[] = [];
	{
		const n0 = nMin(0, 0);
		let best: Band | null = null;
		for (let k = 0; k <= 30; k++) {
			const n = n0 + k * Math.max(1, Math.round(n0 / 60));
			// Symmetric band [−e, e] centred on the equator.
			let a = 0;
			let b = hh;
			for (let it = 0; it < 60; it++) {
				const m = 0.5 * (a + b);
				if (fits(n, -m, m, 0)) a = m;
				else b = m;
			}
			if (a <= 0) continue;
			const band = { lo: -a, hi: a, centre: 0, n };
			if (!best || n / Math.sin(a) < best.n / Math.sin(best.hi)) best = band;
		}
		if (!best) throw new Error('no field count covers the equatorial band');
		north.push(best);
	}
	while (north[north.length - 1].hi < Math.PI / 2) {
		const lo = north[north.length - 1].hi;
		if (lo + 2 * hh >= Math.PI / 2) {
			// Polar cap: the pole is within hh of the centre.
			const centre = Math.max(lo + 0.5 * (Math.PI / 2 - lo), Math.PI / 2 - hh * (1 - 1e-9));
			let n = 3;
			while (!fits(n, lo, Math.PI / 2, centre)) {
				n++;
				if (n > 1_000_000) throw new Error('no field count covers the polar cap');
			}
			north.push({ lo, hi: Math.PI / 2, centre, n });
			break;
		}
		const centre = lo + hh * (1 - 1e-9);
		const n0 = nMin(lo, centre);
		let best: Band | null = null;
		for (let k = 0; k <= 30; k++) {
			const n = n0 + k * Math.max(1, Math.round(n0 / 60));
			const hi = tallest(n, lo, centre, Math.min(Math.PI / 2, lo + 2 * hh));
			if (hi <= lo + 1e-9) continue;
			const band = { lo, hi, centre, n };
			if (!best || n / (Math.sin(hi) - Math.sin(lo)) < best.n / (Math.sin(best.hi) - Math.sin(best.lo))) best = band;
		}
		if (!best) throw new Error('no field count covers a band');
		north.push(best);
	}
	const bands: Band[] = [
		...north
			.slice(1)
			.reverse()
			.map((b) => ({ lo: -b.hi, hi: -b.lo, centre: -b.centre, n: b.n })),
		...north
	];
	const rows: TilingRow[] = [];
	const rowStart: number[] = [];
	let total = 0;
	bands.forEach((b, k) => {
		if (!fits(b.n, b.lo, b.hi, b.centre)) throw new Error(`row ${k}: cell not covered (internal error)`);
		rows.push({ row: k, decLoDeg: b.lo / DEG, decHiDeg: b.hi / DEG, decCentreDeg: b.centre / DEG, count: b.n });
		rowStart.push(total);
		total += b.n;
	});
	rows[0].decLoDeg = -90;
	rows[rows.length - 1].decHiDeg = 90;
	const nRows = rows.length;
	const maxCount = Math.max(...rows.map((r) => r.count));
	const prefix = fov.shape === 'rectangle' ? `W${fmt(fov.widthDeg)}x${fmt(fov.heightDeg)}` : `C${fmt(fov.diameterDeg)}`;
	const tanW = Math.tan((w / 2) * DEG);
	const tanH = Math.tan((h / 2) * DEG);
	return {
		fov,
		overlapDeg: overlap,
		prefix: options.overlapDeg === undefined ? prefix : `${prefix}o${fmt(overlap)}`,
		rows,
		rowStart,
		fieldCount: total,
		tanHalfW: tanW,
		tanHalfH: tanH,
		circumradiusRad: fov.shape === 'circle' ? (fov.diameterDeg / 2) * DEG : Math.atan(Math.hypot(tanW, tanH)),
		rowDigits: Math.max(2, String(nRows - 1).length),
		fieldDigits: Math.max(3, String(maxCount - 1).length)
	};
}

function rowOf(t: Tiling, f: number): number {
	let lo = 0;
	let hi = t.rows.length - 1;
	while (lo < hi) {
		const mid = (lo + hi + 1) >> 1;
		if (t.rowStart[mid] <= f) lo = mid;
		else hi = mid - 1;
	}
	return lo;
}

function centreOf(t: Tiling, f: number): { raDeg: number; decDeg: number } {
	const row = t.rows[rowOf(t, f)];
	return { raDeg: ((f - t.rowStart[row.row] + 0.5) * 360) / row.count, decDeg: row.decCentreDeg };
}

/** The field with flat index `f` (row-major from the south). */
export function fieldAt(t: Tiling, f: number): SkyField {
	const lo = rowOf(t, f);
	const row = t.rows[lo];
	const j = f - t.rowStart[lo];
	return {
		id: `${t.prefix}-R${String(lo).padStart(t.rowDigits, '0')}-F${String(j).padStart(t.fieldDigits, '0')}`,
		row: lo,
		index: j,
		raDeg: ((j + 0.5) * 360) / row.count,
		decDeg: row.decCentreDeg
	};
}

/** All fields of a tiling. */
export function listFields(t: Tiling): SkyField[] {
	return Array.from({ length: t.fieldCount }, (_, f) => fieldAt(t, f));
}

/** Row whose band holds a declination (bands are [lo, hi); the last one includes +90°). */
function rowAtDec(t: Tiling, decDeg: number): number {
	let lo = 0;
	let hi = t.rows.length - 1;
	while (lo < hi) {
		const mid = (lo + hi + 1) >> 1;
		if (t.rows[mid].decLoDeg <= decDeg) lo = mid;
		else hi = mid - 1;
	}
	return lo;
}

/** Flat index of the field whose cell holds (ra, dec): the tiling's partition of the sphere. */
export function cellOf(t: Tiling, raDeg: number, decDeg: number): number {
	const k = rowAtDec(t, decDeg);
	const n = t.rows[k].count;
	let ra = raDeg % 360;
	if (ra < 0) ra += 360;
	return t.rowStart[k] + (Math.floor((ra * n) / 360) % n);
}

/**
 * Whether (ra, dec) lies in the footprint of flat field `f`, optionally grown (positive) or shrunk
 * (negative) by `marginRad` for the pixelisation bound.
 */
export function inFootprint(t: Tiling, f: number, raDeg: number, decDeg: number, marginRad = 0): boolean {
	const c = centreOf(t, f);
	return inFootprintAt(t, c.raDeg, c.decDeg, raDeg, decDeg, marginRad);
}

function inFootprintAt(t: Tiling, raC: number, decC: number, raDeg: number, decDeg: number, marginRad: number): boolean {
	if (t.fov.shape === 'circle') {
		const cosAngle =
			Math.sin(decDeg * DEG) * Math.sin(decC * DEG) + Math.cos(decDeg * DEG) * Math.cos(decC * DEG) * Math.cos((raDeg - raC) * DEG);
		return cosAngle >= Math.cos(t.circumradiusRad + marginRad);
	}
	const p = standard((raDeg - raC) * DEG, decDeg * DEG, decC * DEG);
	if (!p) return false;
	const grow = (tanHalf: number) => Math.tan(Math.atan(tanHalf) + marginRad);
	return Math.abs(p.xi) <= grow(t.tanHalfW) && Math.abs(p.eta) <= grow(t.tanHalfH);
}

/** Flat indices of every field whose footprint (grown by marginRad) contains the direction. */
export function fieldsContaining(t: Tiling, raDeg: number, decDeg: number, marginRad = 0): number[] {
	const out: number[] = [];
	const rho = t.circumradiusRad + Math.max(0, marginRad);
	const rhoDeg = rho / DEG;
	// Row centres increase with the row number; only rows whose centre is within ρ in Dec can match.
	const k0 = rowAtDec(t, decDeg);
	let kLo = k0;
	while (kLo > 0 && t.rows[kLo - 1].decCentreDeg >= decDeg - rhoDeg) kLo--;
	let kHi = k0;
	while (kHi < t.rows.length - 1 && t.rows[kHi + 1].decCentreDeg <= decDeg + rhoDeg) kHi++;
	const cosDec = Math.cos(decDeg * DEG);
	for (let k = kLo; k <= kHi; k++) {
		const row = t.rows[k];
		const n = row.count;
		const step = 360 / n;
		let jFrom: number;
		let jTo: number;
		const s = Math.sin(rho);
		if (Math.abs(decDeg) + rhoDeg >= 90 || s >= cosDec) {
			jFrom = 0;
			jTo = n - 1;
		} else {
			// Centres within angular distance ρ differ from the direction by at most asin(sin ρ / cos δ) in RA.
			const half = Math.asin(s / cosDec) / DEG;
			jFrom = Math.floor((raDeg - half) / step - 0.5) - 1;
			jTo = Math.ceil((raDeg + half) / step - 0.5) + 1;
			if (jTo - jFrom + 1 >= n) {
				jFrom = 0;
				jTo = n - 1;
			}
		}
		for (let jj = jFrom; jj <= jTo; jj++) {
			const j = ((jj % n) + n) % n;
			const raC = ((j + 0.5) * 360) / n;
			if (inFootprintAt(t, raC, row.decCentreDeg, raDeg, decDeg, marginRad)) out.push(t.rowStart[k] + j);
		}
	}
	return out;
}

export interface FieldProbability extends SkyField {
	rank: number;
	/** Probability inside the footprint. */
	probability: number;
	/** Probability of the field's own cell (cells partition the sphere). */
	cellProbability: number;
	/** Union probability of this and all better-ranked fields. */
	cumulative: number;
	/** Pixelisation error bound: probability within one evaluation-pixel radius of the footprint edge. */
	boundaryProbability: number;
}

export interface FieldRanking {
	tiling: { prefix: string; fieldCount: number; overlapDeg: number };
	level: number;
	evaluationOrder: number;
	points: number;
	/** Σ probability of the points evaluated (= Σ cellProbability over all fields). */
	probabilityEvaluated: number;
	fields: FieldProbability[];
}

export interface FieldRankOptions {
	/** Evaluate the map pixels in the credible region at this level (default 0.999; 1 = every pixel with probability). */
	level?: number;
	/** Override the evaluation order. */
	evaluationOrder?: number;
	limit?: number;
}

/** Mean pixel side at an order, degrees: √(4π / N_pix). */
function pixelSideDeg(order: number): number {
	return Math.sqrt(SPHERE_DEG2 / npix(order));
}

/**
 * Probability enclosed by each field of a tiling, ranked (only fields with probability > 0).
 */
export function rankFields(map: SkyMap, t: Tiling, options: FieldRankOptions = {}): FieldRanking {
	const level = options.level ?? 0.999;
	const { w, h } = tiledRectangle(t.fov);
	const side = t.fov.shape === 'circle' ? t.fov.diameterDeg : Math.min(w, h);
	let evalOrder = options.evaluationOrder ?? 0;
	if (options.evaluationOrder === undefined) while (pixelSideDeg(evalOrder) > side / 20 && evalOrder < 13) evalOrder++;
	// Largest centre-to-corner distance of a pixel: healpy's max_pixrad is ≤ 1.0446 × the mean side
	// for orders 3–13 (healpy 1.16.1); 1.1 × side leaves a margin.
	const rPix = 1.1 * pixelSideDeg(evalOrder) * DEG;
	const threshold = level >= 1 ? Number.MIN_VALUE : credibleRegions(map, [level])[0].densityThresholdPerSr;
	const areas = areaTable();
	const dens = map.probDensity;

	const enclosed = new Float64Array(t.fieldCount);
	const cell = new Float64Array(t.fieldCount);
	const boundary = new Float64Array(t.fieldCount);
	const members: number[][] = [];
	const pointProb: number[] = [];
	let evaluated = 0;
	const visit = (ra: number, dec: number, p: number) => {
		const id = pointProb.length;
		pointProb.push(p);
		evaluated += p;
		cell[cellOf(t, ra, dec)] += p;
		const grown = fieldsContaining(t, ra, dec, rPix);
		for (const f of grown) {
			const c = centreOf(t, f);
			const inside = inFootprintAt(t, c.raDeg, c.decDeg, ra, dec, 0);
			const deep = inFootprintAt(t, c.raDeg, c.decDeg, ra, dec, -rPix);
			if (inside) {
				enclosed[f] += p;
				(members[f] ??= []).push(id);
			}
			if (!deep) boundary[f] += p;
		}
	};
	const px = { order: 0, ipix: 0 };
	for (let i = 0; i < map.size; i++) {
		const d = dens[i];
		if (!(d >= threshold) || d === 0) continue;
		nestedPixel(map, i, px);
		const o = px.order;
		const ipix = px.ipix;
		if (o >= evalOrder) {
			const c = nestToRadec(o, ipix);
			visit(c.ra, c.dec, d * areas[o]);
		} else {
			const f = 4 ** (evalOrder - o);
			const p = d * areas[evalOrder];
			for (let k = 0; k < f; k++) {
				const c = nestToRadec(evalOrder, ipix * f + k);
				visit(c.ra, c.dec, p);
			}
		}
	}

	const ranked: number[] = [];
	for (let f = 0; f < t.fieldCount; f++) if (enclosed[f] > 0) ranked.push(f);
	ranked.sort((a, b) => enclosed[b] - enclosed[a] || a - b);
	const covered = new Uint8Array(pointProb.length);
	let union = 0;
	const keep = Math.min(ranked.length, options.limit ?? ranked.length);
	const fields: FieldProbability[] = [];
	for (let r = 0; r < keep; r++) {
		const f = ranked[r];
		for (const id of members[f] ?? []) {
			if (!covered[id]) {
				covered[id] = 1;
				union += pointProb[id];
			}
		}
		fields.push({
			...fieldAt(t, f),
			rank: r + 1,
			probability: enclosed[f],
			cellProbability: cell[f],
			cumulative: union,
			boundaryProbability: boundary[f]
		});
	}
	return {
		tiling: { prefix: t.prefix, fieldCount: t.fieldCount, overlapDeg: t.overlapDeg },
		level,
		evaluationOrder: evalOrder,
		points: pointProb.length,
		probabilityEvaluated: evaluated,
		fields
	};
}
