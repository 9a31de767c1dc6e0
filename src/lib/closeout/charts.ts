/**
 * Geometry of the report's two drawings (the PDF draws them with vector paths): the sky round the
 * credible region and the footprints, and the coverage curve against time since the merger.
 */

export interface Box {
	x: number;
	y: number;
	width: number;
	height: number;
}

export interface SkyWindow {
	/** RA at the middle of the window, degrees. */
	raCentreDeg: number;
	/** Half the RA span, degrees of RA (not of arc). */
	raHalfSpanDeg: number;
	decMinDeg: number;
	decMaxDeg: number;
}

const wrap180 = (x: number) => ((((x + 180) % 360) + 360) % 360) - 180;

/**
 * The smallest RA arc holding every point (the complement of the widest empty gap) and their Dec
 * range, padded by `marginDeg` and widened to at least `minSpanDeg` (Dec: half of it). Null
 * without points.
 */
export function skyWindow(points: [number, number][], marginDeg = 2, minSpanDeg = 10): SkyWindow | null {
	if (!points.length) return null;
	const ras = points.map(([ra]) => ((ra % 360) + 360) % 360).sort((a, b) => a - b);
	let gap = ras[0] + 360 - ras[ras.length - 1];
	let start = ras[0];
	for (let i = 0; i + 1 < ras.length; i++) {
		if (ras[i + 1] - ras[i] > gap) {
			gap = ras[i + 1] - ras[i];
			start = ras[i + 1];
		}
	}
	const span = Math.min(360, 360 - gap + 2 * marginDeg);
	const half = Math.max(span, minSpanDeg) / 2;
	const centre = (start - marginDeg + span / 2 + 360) % 360;
	const decs = points.map(([, dec]) => dec);
	let lo = Math.min(...decs) - marginDeg;
	let hi = Math.max(...decs) + marginDeg;
	if (hi - lo < minSpanDeg / 2) {
		const mid = (lo + hi) / 2;
		lo = mid - minSpanDeg / 4;
		hi = mid + minSpanDeg / 4;
	}
	return { raCentreDeg: centre, raHalfSpanDeg: Math.min(180, half), decMinDeg: Math.max(-90, lo), decMaxDeg: Math.min(90, hi) };
}

export interface SkyProjection {
	/** Page position of a direction; RA grows to the left (east left, as the sky is seen). */
	project(raDeg: number, decDeg: number): [number, number];
	/** The drawn area inside the box (the window keeps its shape, so it may not fill the box). */
	frame: Box;
	window: SkyWindow;
}

/**
 * An equirectangular projection of the window into the box, RA scaled by cos(Dec) at the window's
 * middle Dec so that shapes near it keep their proportions.
 */
export function skyProjection(window: SkyWindow, box: Box): SkyProjection {
	const decMid = ((window.decMinDeg + window.decMaxDeg) / 2) * (Math.PI / 180);
	const xSpan = 2 * window.raHalfSpanDeg * Math.max(0.2, Math.cos(decMid));
	const ySpan = window.decMaxDeg - window.decMinDeg;
	const scale = Math.min(box.width / xSpan, box.height / ySpan);
	const w = xSpan * scale;
	const h = ySpan * scale;
	const frame = { x: box.x + (box.width - w) / 2, y: box.y + (box.height - h) / 2, width: w, height: h };
	const project = (raDeg: number, decDeg: number): [number, number] => {
		const dRa = wrap180(raDeg - window.raCentreDeg);
		return [frame.x + frame.width / 2 - (dRa / window.raHalfSpanDeg) * (frame.width / 2), frame.y + ((window.decMaxDeg - decDeg) / ySpan) * frame.height];
	};
	return { project, frame, window };
}

/**
 * Split a line where neighbouring points jump across the window's RA seam (more than half the
 * window apart), so that no stroke crosses the drawing.
 */
export function splitAtSeam(points: [number, number][], window: SkyWindow): [number, number][][] {
	const out: [number, number][][] = [];
	let piece: [number, number][] = [];
	let last: number | null = null;
	for (const p of points) {
		const d = wrap180(p[0] - window.raCentreDeg);
		if (last !== null && Math.abs(d - last) > Math.max(20, window.raHalfSpanDeg)) {
			if (piece.length > 1) out.push(piece);
			piece = [];
		}
		piece.push(p);
		last = d;
	}
	if (piece.length > 1) out.push(piece);
	return out;
}

/** Round axis steps: the largest of 1, 2, 5 × 10^k giving at least `minTicks` intervals. */
export function niceStep(span: number, minTicks = 4): number {
	if (!(span > 0)) return 1;
	const raw = span / minTicks;
	const p = 10 ** Math.floor(Math.log10(raw));
	for (const m of [5, 2, 1]) if (m * p <= raw) return m * p;
	return p;
}

/**
 * The coverage curve as steps: each value holds from its time until the next observation,
 * the last until `endHours`. Points without a time since merger are left out.
 */
export function stepPoints(curve: { hoursSinceMerger: number | null; value: number | null }[], endHours?: number): [number, number][] {
	const pts = curve.filter((p): p is { hoursSinceMerger: number; value: number } => p.hoursSinceMerger !== null && p.value !== null);
	if (!pts.length) return [];
	const out: [number, number][] = [[pts[0].hoursSinceMerger, 0]];
	let prev = 0;
	for (const p of pts) {
		out.push([p.hoursSinceMerger, prev], [p.hoursSinceMerger, p.value]);
		prev = p.value;
	}
	out.push([Math.max(endHours ?? 0, pts[pts.length - 1].hoursSinceMerger), prev]);
	return out;
}
