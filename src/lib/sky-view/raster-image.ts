/**
 * Packing the stored display raster for the browser, and painting it into RGBA for a canvas.
 * Pure: no DOM, so the server packs and tests check the same code the view runs.
 */
import { rampColour } from './palette.ts';
import type { DisplayRaster } from './types.ts';

/** The shape `skyRaster` (src/lib/sky/raster.ts) stores, as far as the view needs it. */
export interface StoredRaster {
	width: number;
	height: number;
	probDensity: number[];
	credibleLevel: number[];
}

export function isStoredRaster(v: unknown): v is StoredRaster {
	if (!v || typeof v !== 'object') return false;
	const r = v as Record<string, unknown>;
	return (
		Number.isInteger(r.width) &&
		Number.isInteger(r.height) &&
		Array.isArray(r.probDensity) &&
		Array.isArray(r.credibleLevel) &&
		r.probDensity.length === (r.width as number) * (r.height as number) &&
		r.credibleLevel.length === r.probDensity.length
	);
}

function toBase64(bytes: Uint8Array): string {
	let s = '';
	for (let i = 0; i < bytes.length; i += 0x8000) s += String.fromCharCode(...bytes.subarray(i, i + 0x8000));
	return btoa(s);
}

function fromBase64(text: string): Uint8Array {
	const s = atob(text);
	const out = new Uint8Array(s.length);
	for (let i = 0; i < s.length; i++) out[i] = s.charCodeAt(i);
	return out;
}

/** One byte per cell: √(ρ/ρ_max) and the credible level, each scaled to 0…255. */
export function packRaster(r: StoredRaster): DisplayRaster {
	const n = r.width * r.height;
	let peak = 0;
	for (let i = 0; i < n; i++) if (r.probDensity[i] > peak) peak = r.probDensity[i];
	const density = new Uint8Array(n);
	const level = new Uint8Array(n);
	for (let i = 0; i < n; i++) {
		density[i] = peak > 0 ? Math.round(255 * Math.sqrt(Math.max(0, r.probDensity[i]) / peak)) : 0;
		level[i] = Math.round(255 * Math.max(0, Math.min(1, r.credibleLevel[i])));
	}
	return { width: r.width, height: r.height, peakDensityPerSr: peak, density: toBase64(density), level: toBase64(level) };
}

export function unpackRaster(d: DisplayRaster): { density: Uint8Array; level: Uint8Array } {
	return { density: fromBase64(d.density), level: fromBase64(d.level) };
}

/**
 * RGBA pixels for the image overlay, columns mirrored so that RA increases to the LEFT
 * (image column j holds RA 360 − (j + ½)·360/width). Cells beyond the 97% credible level
 * fade out so the grid and the Galactic plane stay readable across the empty sky.
 */
export function rasterRgba(d: DisplayRaster): Uint8ClampedArray<ArrayBuffer> {
	const { density, level } = unpackRaster(d);
	const out = new Uint8ClampedArray(d.width * d.height * 4);
	for (let row = 0; row < d.height; row++) {
		for (let j = 0; j < d.width; j++) {
			const src = row * d.width + (d.width - 1 - j);
			const [r, g, b] = rampColour(density[src] / 255);
			const lv = level[src] / 255;
			const alpha = Math.round(235 * Math.max(0, Math.min(1, (1 - lv) / 0.03)));
			const o = (row * d.width + j) * 4;
			out[o] = r;
			out[o + 1] = g;
			out[o + 2] = b;
			out[o + 3] = alpha;
		}
	}
	return out;
}
