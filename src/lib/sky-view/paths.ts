/**
 * The sky view's projection: plate carrée with x = −RA, y = Dec (degrees), so that RA increases
 * to the LEFT as on a sky chart seen from inside the sphere. Leaflet's LatLng is (y, x).
 * Lines and outlines that cross RA 0/360 are unwrapped and drawn again one turn over, so that
 * both halves appear; outlines that circle a pole are closed along it.
 */

export type LatLng = [number, number];

/** Leaflet position of (RA, Dec). */
export function toLatLng(raDeg: number, decDeg: number): LatLng {
	return [decDeg, -raDeg];
}

/** RA (0…360) and Dec of a Leaflet position. */
export function fromLatLng(lat: number, lng: number): { raDeg: number; decDeg: number } {
	return { raDeg: (((-lng % 360) + 360) % 360), decDeg: lat };
}

/** RA continuous along the path: each step taken the short way round. */
function unwrap(points: [number, number][]): [number, number][] {
	const out: [number, number][] = [];
	let prev = NaN;
	for (const [ra, dec] of points) {
		let r = ra;
		if (Number.isFinite(prev)) {
			while (r - prev > 180) r -= 360;
			while (r - prev < -180) r += 360;
		}
		out.push([r, dec]);
		prev = r;
	}
	return out;
}

/** Shifts (whole turns) that bring some of an unwrapped path into RA 0…360. */
function shifts(path: [number, number][]): number[] {
	const ras = path.map((p) => p[0]);
	const lo = Math.min(...ras);
	const hi = Math.max(...ras);
	const out: number[] = [];
	for (let k = Math.ceil(-hi / 360); k <= Math.floor((360 - lo) / 360); k++) out.push(360 * k);
	return out;
}

/** Pieces of a polyline inside RA 0…360, cut where it crosses the edges. */
function clipLine(path: [number, number][]): [number, number][][] {
	const out: [number, number][][] = [];
	let piece: [number, number][] = [];
	const inside = (p: [number, number]) => p[0] >= 0 && p[0] <= 360;
	const cross = (a: [number, number], b: [number, number], edge: number): [number, number] => [edge, a[1] + ((edge - a[0]) / (b[0] - a[0])) * (b[1] - a[1])];
	for (let k = 0; k < path.length; k++) {
		const p = path[k];
		const prev = path[k - 1];
		if (inside(p)) {
			if (prev && !inside(prev)) piece.push(cross(prev, p, prev[0] < 0 ? 0 : 360));
			piece.push(p);
		} else if (prev && inside(prev)) {
			piece.push(cross(prev, p, p[0] < 0 ? 0 : 360));
			out.push(piece);
			piece = [];
		}
	}
	if (piece.length > 1) out.push(piece);
	return out.filter((q) => q.length > 1);
}

/** A polygon clipped to RA 0…360 (Sutherland & Hodgman 1974, against the two edges). */
function clipPolygon(poly: [number, number][]): [number, number][] {
	let pts = poly;
	for (const [edge, keep] of [
		[0, (x: number) => x >= 0],
		[360, (x: number) => x <= 360]
	] as const) {
		const out: [number, number][] = [];
		for (let k = 0; k < pts.length; k++) {
			const a = pts[k];
			const b = pts[(k + 1) % pts.length];
			const ina = keep(a[0]);
			const inb = keep(b[0]);
			if (ina) out.push(a);
			if (ina !== inb) out.push([edge, a[1] + ((edge - a[0]) / (b[0] - a[0])) * (b[1] - a[1])]);
		}
		pts = out;
		if (pts.length === 0) break;
	}
	return pts;
}

/** Copies of an unwrapped line, shifted by whole turns and clipped to RA 0…360. */
function turns(path: [number, number][]): LatLng[][] {
	const out: LatLng[][] = [];
	for (const s of shifts(path)) {
		for (const piece of clipLine(path.map(([ra, dec]) => [ra + s, dec]))) out.push(piece.map(([ra, dec]) => toLatLng(ra, dec)));
	}
	return out;
}

/** Copies of an unwrapped polygon, shifted by whole turns and clipped to RA 0…360. */
function polygonTurns(path: [number, number][]): LatLng[][] {
	const out: LatLng[][] = [];
	for (const s of shifts(path)) {
		const clipped = clipPolygon(path.map(([ra, dec]) => [ra + s, dec]));
		if (clipped.length >= 3) out.push(clipped.map(([ra, dec]) => toLatLng(ra, dec)));
	}
	return out;
}

/**
 * An open line (a contour, the Galactic plane) as Leaflet paths. A jump larger than `maxStepDeg`
 * between neighbours (a contour ending at the map edge and resuming) starts a new piece.
 */
export function linePaths(points: [number, number][], options: { closed?: boolean; maxStepDeg?: number } = {}): LatLng[][] {
	if (points.length < 2) return [];
	const pts = options.closed ? [...points, points[0]] : points;
	const maxStep = options.maxStepDeg ?? 20;
	const out: LatLng[][] = [];
	let piece: [number, number][] = [];
	for (const p of unwrap(pts)) {
		const last = piece[piece.length - 1];
		if (last && Math.hypot(p[0] - last[0], p[1] - last[1]) > maxStep) {
			if (piece.length > 1) out.push(...turns(piece));
			// Restart the unwrapped RA near 0…360 so copies stay few.
			piece = [];
		}
		piece.push(p);
	}
	if (piece.length > 1) out.push(...turns(piece));
	return out;
}

/**
 * A closed outline (footprint, avoidance zone) as Leaflet polygons. An outline that winds once
 * round the pole (net RA change ±360°) is closed along Dec = ±90 on the side of `poleDec`.
 */
export function outlinePolygons(points: [number, number][], poleDec?: 90 | -90): LatLng[][] {
	if (points.length < 3) return [];
	const path = unwrap([...points, points[0]]);
	const winding = path[path.length - 1][0] - path[0][0];
	path.pop();
	if (Math.abs(winding) > 180) {
		const pole = poleDec ?? (path.reduce((s, p) => s + p[1], 0) >= 0 ? 90 : -90);
		const first = path[0];
		const last = path[path.length - 1];
		path.push([last[0], pole], [first[0], pole]);
	}
	return polygonTurns(path);
}

export function formatRaHours(raDeg: number): string {
	const totalMin = Math.round((((raDeg % 360) + 360) % 360) * 4);
	const h = Math.floor(totalMin / 60) % 24;
	const m = totalMin % 60;
	return m === 0 ? `${h}h` : `${h}h${String(m).padStart(2, '0')}m`;
}

/** Dec as ±D° or, for grid steps under a degree, ±D°MM′. */
export function formatDec(decDeg: number, stepDeg = 1): string {
	const sign = decDeg > 1e-9 ? '+' : decDeg < -1e-9 ? '−' : '';
	const a = Math.abs(decDeg);
	if (stepDeg >= 1) return `${sign}${Math.round(a * 10) / 10}°`;
	const totalMin = Math.round(a * 60);
	const d = Math.floor(totalMin / 60);
	const m = totalMin % 60;
	return `${sign}${d}°${String(m).padStart(2, '0')}′`;
}

/** Grid spacings (degrees) for a visible span: about four to eight lines across. */
export function gridStep(spanDeg: number, kind: 'ra' | 'dec'): number {
	const steps = kind === 'ra' ? [30, 15, 7.5, 5, 2.5, 1.25, 0.5, 0.25] : [30, 15, 10, 5, 2, 1, 0.5, 0.25];
	for (const s of steps) if (spanDeg / s >= 4) return s;
	return steps[steps.length - 1];
}

/**
 * The box to open the view on round some directions: RA is the smallest arc that holds them all
 * (found as the complement of the widest empty gap), padded by `marginDeg` and widened to at
 * least `minSpanDeg`. The map runs RA 360 → 0 in one piece, so an arc across RA 0 becomes the
 * whole RA range. Returns Leaflet bounds [[south, west], [north, east]], or null with no points.
 */
export function focusBounds(points: [number, number][], marginDeg = 3, minSpanDeg = 12): [LatLng, LatLng] | null {
	if (!points.length) return null;
	const ras = points.map(([ra]) => ((ra % 360) + 360) % 360).sort((a, b) => a - b);
	let gap = ras[0] + 360 - ras[ras.length - 1];
	let gapAfter = ras.length - 1;
	for (let i = 0; i + 1 < ras.length; i++) {
		if (ras[i + 1] - ras[i] > gap) {
			gap = ras[i + 1] - ras[i];
			gapAfter = i;
		}
	}
	let raMin = 0;
	let raMax = 360;
	// Widest gap across RA 0: the arc runs from the first RA to the last without crossing 0.
	if (gapAfter === ras.length - 1) {
		[raMin, raMax] = widen(ras[0] - marginDeg, ras[ras.length - 1] + marginDeg, minSpanDeg, 0, 360);
	}
	const decs = points.map(([, dec]) => dec);
	const [decMin, decMax] = widen(Math.min(...decs) - marginDeg, Math.max(...decs) + marginDeg, minSpanDeg / 2, -90, 90);
	// 0 − RA: the east edge at RA 0 is x = +0, not −0.
	return [[decMin, 0 - raMax], [decMax, 0 - raMin]];
}

/** [lo, hi] widened about its middle to at least `span`, then shifted (not cut) inside [min, max]. */
function widen(lo: number, hi: number, span: number, min: number, max: number): [number, number] {
	if (hi - lo < span) {
		const mid = (lo + hi) / 2;
		lo = mid - span / 2;
		hi = mid + span / 2;
	}
	if (lo < min) [lo, hi] = [min, Math.min(max, hi + (min - lo))];
	if (hi > max) [lo, hi] = [Math.max(min, lo - (hi - max)), max];
	return [lo, hi];
}
