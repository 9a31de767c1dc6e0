import { describe, expect, it } from 'vitest';
import { smallCircle } from '../targeting/sky-geometry.ts';
import { focusBounds, formatDec, formatRaHours, fromLatLng, linePaths, outlinePolygons, toLatLng } from './paths.ts';
import { packRaster, rasterRgba, unpackRaster } from './raster-image.ts';
import { PROBABILITY_RAMP, rampColour } from './palette.ts';

describe('sky view projection', () => {
	it('opens on the smallest RA arc holding the targets, padded, and on the whole RA range when that arc crosses RA 0', () => {
		expect.hasAssertions();
		expect(focusBounds([])).toBeNull();
		// RA 100…110, Dec −5…5, margin 3: west edge at RA 113 (x = −113), east at RA 97.
		expect(focusBounds([[100, -5], [110, 5], [105, 0]], 3, 12)).toEqual([[-8, -113], [8, -97]]);
		// One galaxy: widened to 12° in RA and 6° in Dec about it.
		expect(focusBounds([[200, 40]], 3, 12)).toEqual([[37, -206], [43, -194]]);
		// Near the pole the Dec box is shifted, not cut.
		expect(focusBounds([[10, 89]], 0, 12)).toEqual([[84, -16], [90, -4]]);
		// 355 and 5 are 10° apart across RA 0: the map cannot show that in one piece.
		expect(focusBounds([[355, 0], [5, 1]], 3, 12)).toEqual([[-3, -360], [4, 0]]);
		// 10, 180, 350: the smallest arc holding them runs 180 → 350 → 10, across RA 0; but 10…200 does not cross it.
		expect(focusBounds([[10, 0], [180, 0], [350, 0]], 0, 12)).toEqual([[-3, -360], [3, 0]]);
		expect(focusBounds([[10, 0], [200, 0], [100, 0]], 0, 12)).toEqual([[-3, -200], [3, -10]]);
	});

	it('x = −RA: a larger RA lies further left; the inverse returns RA in 0…360', () => {
		expect.hasAssertions();
		expect(toLatLng(90, 10)[1]).toBeLessThan(toLatLng(30, 10)[1]);
		expect(fromLatLng(...toLatLng(359.5, -20))).toEqual({ raDeg: 359.5, decDeg: -20 });
	});

	it('a line across RA 0 is drawn in two pieces, each inside the sky and meeting the edges', () => {
		expect.hasAssertions();
		const paths = linePaths([
			[350, 0],
			[355, 1],
			[5, 2],
			[10, 3]
		]);
		expect(paths).toHaveLength(2);
		for (const p of paths) for (const [, x] of p) expect(x <= 0 && x >= -360).toBe(true);
		const xs = paths.flat().map(([, x]) => x);
		expect(Math.min(...xs)).toBe(-360);
		expect(Math.max(...xs)).toBe(-0);
		// Interpolated to Dec 1.5 where it crosses RA 0/360.
		const edge = paths.flat().filter(([, x]) => x === -360 || x === 0);
		for (const [dec] of edge) expect(dec).toBeCloseTo(1.5, 9);
	});

	it('an avoidance circle round the pole closes along Dec +90', () => {
		expect.hasAssertions();
		const polys = outlinePolygons(smallCircle(40, 70, 30, 90), 90);
		expect(polys.length).toBeGreaterThanOrEqual(1);
		const decs = polys.flat().map(([dec]) => dec);
		expect(Math.max(...decs)).toBe(90);
		expect(Math.min(...decs)).toBeCloseTo(40, 6);
	});

	it('labels: RA in hours and minutes, Dec with arcminutes for fine grids', () => {
		expect.hasAssertions();
		expect(formatRaHours(0)).toBe('0h');
		expect(formatRaHours(187.5)).toBe('12h30m');
		expect(formatDec(-22.25, 0.25)).toBe('−22°15′');
		expect(formatDec(30)).toBe('+30°');
	});
});

describe('raster image', () => {
	const stored = {
		width: 4,
		height: 2,
		// Peak in the first column (RA 0–90), nothing in the last.
		probDensity: [4, 1, 0.25, 0, 4, 1, 0.25, 0],
		credibleLevel: [0.2, 0.6, 0.9, 1, 0.2, 0.6, 0.9, 1]
	};

	it('packs √(ρ/ρmax) and the level into bytes and back', () => {
		expect.hasAssertions();
		const packed = packRaster(stored);
		const { density, level } = unpackRaster(packed);
		expect(packed.peakDensityPerSr).toBe(4);
		expect(Array.from(density.slice(0, 4))).toEqual([255, 128, 64, 0]);
		expect(Array.from(level.slice(0, 4))).toEqual([51, 153, 230, 255]);
	});

	it('mirrors columns so that RA increases to the left, with our ramp; empty sky is transparent', () => {
		expect.hasAssertions();
		const rgba = rasterRgba(packRaster(stored));
		// Image column 3 (rightmost) is RA 0–90, the peak: the ramp's top colour.
		expect(Array.from(rgba.slice(12, 15))).toEqual(PROBABILITY_RAMP.at(-1)![1]);
		expect(Array.from(rgba.slice(4 * 2, 4 * 2 + 3))).toEqual(rampColour(128 / 255));
		// Image column 0 is the last raster column: credible level 1 → alpha 0.
		expect(rgba[3]).toBe(0);
		expect(rgba[15]).toBe(235);
	});
});
