/**
 * Display raster of a sky map: an equirectangular grid of probability density with the
 * credible level of every cell, plus credible-region contours traced by marching squares
 * (Lorensen & Cline 1987, in its 2-D form) on the credible-level grid. Plain JSON-able data,
 * computed once per map.
 */
import { credibleLevelsOfDensities } from './credible.ts';
import { pixelAt, type SkyMap } from './moc.ts';

export interface SkyRaster {
	/** Cells along RA (0..360°, cell centres at (i + ½)·360/width) and Dec (+90 → −90). */
	width: number;
	height: number;
	/** Row-major from the north (row 0 at Dec = +90 − ½ cell), RA increasing along a row; per sr. */
	probDensity: number[];
	/** Credible level of each cell (0 = densest). */
	credibleLevel: number[];
	/** Contour polylines per level: arrays of [ra, dec] in degrees. */
	contours: { level: number; lines: [number, number][][] }[];
}

export interface RasterOptions {
	width?: number;
	height?: number;
	levels?: number[];
}

/** Sample the map at the centres of an equirectangular grid and trace credible contours. */
export function skyRaster(map: SkyMap, options: RasterOptions = {}): SkyRaster {
	const width = options.width ?? 360;
	const height = options.height ?? 180;
	const levels = options.levels ?? [0.5, 0.9];
	const dRa = 360 / width;
	const dDec = 180 / height;
	const density = new Float64Array(width * height);
	for (let r = 0; r < height; r++) {
		const dec = 90 - (r + 0.5) * dDec;
		for (let c = 0; c < width; c++) {
			const i = pixelAt(map, (c + 0.5) * dRa, dec);
			density[r * width + c] = i < 0 ? 0 : map.probDensity[i];
		}
	}
	const level = credibleLevelsOfDensities(map, density);
	const contours = levels.map((l) => ({ level: l, lines: marchingSquares(level, width, height, l, dRa, dDec) }));
	return {
		width,
		height,
		probDensity: Array.from(density),
		credibleLevel: Array.from(level, (v) => Math.round(v * 1e6) / 1e6),
		contours
	};
}

/**
 * Iso-lines where the credible level crosses `iso`, on cell centres; RA wraps around.
 * Segments are joined into polylines through shared edge points.
 */
function marchingSquares(
	grid: Float64Array,
	width: number,
	height: number,
	iso: number,
	dRa: number,
	dDec: number
): [number, number][][] {
	const at = (r: number, c: number) => grid[r * width + (((c % width) + width) % width)];
	const point = (r: number, c: number, r2: number, c2: number): { key: string; p: [number, number] } => {
		const a = at(r, c);
		const b = at(r2, c2);
		const t = a === b ? 0.5 : (iso - a) / (b - a);
		const rr = r + t * (r2 - r);
		const cc = c + t * (c2 - c);
		const ra = ((((cc + 0.5) * dRa) % 360) + 360) % 360;
		const dec = 90 - (rr + 0.5) * dDec;
		return { key: `${r},${((c % width) + width) % width},${r2},${((c2 % width) + width) % width}`, p: [round(ra), round(dec)] };
	};
	const segments: [{ key: string; p: [number, number] }, { key: string; p: [number, number] }][] = [];
	for (let r = 0; r < height - 1; r++) {
		for (let c = 0; c < width; c++) {
			// Corners: 0 top-left, 1 top-right, 2 bottom-right, 3 bottom-left; "inside" = level < iso.
			const v0 = at(r, c) < iso ? 1 : 0;
			const v1 = at(r, c + 1) < iso ? 1 : 0;
			const v2 = at(r + 1, c + 1) < iso ? 1 : 0;
			const v3 = at(r + 1, c) < iso ? 1 : 0;
			const code = v0 | (v1 << 1) | (v2 << 2) | (v3 << 3);
			if (code === 0 || code === 15) continue;
			const top = () => point(r, c, r, c + 1);
			const right = () => point(r, c + 1, r + 1, c + 1);
			const bottom = () => point(r + 1, c, r + 1, c + 1);
			const left = () => point(r, c, r + 1, c);
			switch (code) {
				case 1: case 14: segments.push([left(), top()]); break;
				case 2: case 13: segments.push([top(), right()]); break;
				case 3: case 12: segments.push([left(), right()]); break;
				case 4: case 11: segments.push([right(), bottom()]); break;
				case 6: case 9: segments.push([top(), bottom()]); break;
				case 7: case 8: segments.push([left(), bottom()]); break;
				case 5: segments.push([left(), top()], [right(), bottom()]); break;
				case 10: segments.push([top(), right()], [left(), bottom()]); break;
			}
		}
	}
	// Join segments end to end.
	const byKey = new Map<string, number[]>();
	segments.forEach(([a, b], i) => {
		for (const k of [a.key, b.key]) {
			const l = byKey.get(k);
			if (l) l.push(i);
			else byKey.set(k, [i]);
		}
	});
	const used = new Uint8Array(segments.length);
	const lines: [number, number][][] = [];
	for (let s = 0; s < segments.length; s++) {
		if (used[s]) continue;
		used[s] = 1;
		const line = [segments[s][0], segments[s][1]];
		for (const forward of [true, false]) {
			for (;;) {
				const end = forward ? line[line.length - 1] : line[0];
				const next = (byKey.get(end.key) ?? []).find((i) => !used[i]);
				if (next === undefined) break;
				used[next] = 1;
				const [a, b] = segments[next];
				const other = a.key === end.key ? b : a;
				if (forward) line.push(other);
				else line.unshift(other);
			}
		}
		lines.push(line.map((q) => q.p));
	}
	return lines;
}

function round(v: number): number {
	return Math.round(v * 1000) / 1000;
}
