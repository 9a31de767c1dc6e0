import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { analyseSkymap, locate, pixelAt, readBinTable, readFits, readSkyMap, regionPixels, regionContains, radecToNest, skyRaster } from './index.ts';
import { writeBinTableFits } from './fits-write.ts';

// Expected values: numpy/healpy/scipy in tests/fixtures/sky/make_fixtures.py (versions in VERSIONS.md).
const dir = new URL('../../../tests/fixtures/sky/', import.meta.url);
const file = (name: string) => new Uint8Array(readFileSync(new URL(name, dir)));
const expected = JSON.parse(readFileSync(new URL('expected.json', dir), 'utf8'));
const rel = (a: number, b: number) => Math.abs(a - b) / Math.abs(b);

describe('multi-order (NUNIQ) map written by astropy', () => {
	const e = expected.moc;
	for (const name of ['moc_map.fits', 'moc_map.fits.gz']) {
		it(`${name}: credible areas to 0.1%, rows, orders, peak`, () => {
			expect.hasAssertions();
			const s = analyseSkymap(file(name));
			expect(s.pixels).toBe(e.rows);
			expect(s.maxOrder).toBe(e.maxOrder);
			expect(s.map.minOrder).toBe(e.minOrder);
			expect(rel(s.area50, e.areasDeg2['0.5'])).toBeLessThan(1e-3);
			expect(rel(s.area90, e.areasDeg2['0.9'])).toBeLessThan(1e-3);
			expect(rel(s.area99, e.areasDeg2['0.99'])).toBeLessThan(1e-3);
			expect(s.probabilitySum).toBeCloseTo(e.probabilitySum, 9);
			expect(s.peak.ra).toBeCloseTo(e.peak.ra, 9);
			expect(s.peak.dec).toBeCloseTo(e.peak.dec, 9);
		});
	}

	it('sky-marginal distance matches direct numerical integration (scipy Simpson) to 0.1%', () => {
		expect.hasAssertions();
		const s = analyseSkymap(file('moc_map.fits'));
		expect(rel(s.distanceMean!, e.distanceMean)).toBeLessThan(1e-3);
		expect(rel(s.distanceStd!, e.distanceStd)).toBeLessThan(1e-3);
		// Pixels with DISTMU = ∞ hold some probability: reported, and excluded.
		expect(e.probabilityWithDistance).toBeLessThan(0.999);
		expect(s.warnings.join(' ')).toMatch(/without distance information/);
	});

	it('locates probe directions: same pixel as healpy, credible level, density, conditional distance, dP/dV', () => {
		expect.hasAssertions();
		const map = readSkyMap(file('moc_map.fits'));
		for (const p of e.probes) {
			expect(pixelAt(map, p.ra, p.dec)).toBe(p.row);
			const r = locate(map, p.ra, p.dec, p.distanceProbe);
			expect(rel(r.probabilityDensity, p.probDensity)).toBeLessThan(1e-12);
			expect(r.credibleLevel).toBeCloseTo(p.credibleLevel, 9);
			if (p.distanceMean === null) {
				expect(r.distanceMean).toBeNull();
			} else {
				expect(rel(r.distanceMean!, p.distanceMean)).toBeLessThan(1e-6);
				expect(rel(r.distanceStd!, p.distanceStd)).toBeLessThan(1e-6);
				expect(rel(r.dPdV!, p.dPdV)).toBeLessThan(1e-6);
			}
		}
	});

	it('region pixels at a fixed order cover the 90% region', () => {
		expect.hasAssertions();
		const map = readSkyMap(file('moc_map.fits'));
		const pix = regionPixels(map, 0.9, 8);
		for (let k = 1; k < pix.length; k++) expect(pix[k]).toBeGreaterThan(pix[k - 1]);
		const inside = e.probes.filter((p: { credibleLevel: number }) => p.credibleLevel < 0.85);
		const outside = e.probes.filter((p: { credibleLevel: number }) => p.credibleLevel > 0.95);
		expect(inside.length).toBeGreaterThan(2);
		for (const p of inside) expect(regionContains(pix, radecToNest(8, p.ra, p.dec))).toBe(true);
		for (const p of outside) expect(regionContains(pix, radecToNest(8, p.ra, p.dec))).toBe(false);
		// Order-8 pixels: 0.0524 deg² each; the cover is at least the region's area.
		expect(pix.length * (41252.96124941927 / (12 * 4 ** 8))).toBeGreaterThanOrEqual(e.areasDeg2['0.9'] * 0.999);
	});

	it('raster: contours exist and the 90% contour encloses the 50% one in credible level', () => {
		expect.hasAssertions();
		const map = readSkyMap(file('moc_map.fits'));
		const r = skyRaster(map, { width: 180, height: 90 });
		expect(r.probDensity.length).toBe(180 * 90);
		const c50 = r.contours.find((c) => c.level === 0.5)!;
		const c90 = r.contours.find((c) => c.level === 0.9)!;
		expect(c50.lines.length).toBeGreaterThan(0);
		expect(c90.lines.length).toBeGreaterThan(0);
		const cells90 = r.credibleLevel.filter((v) => v < 0.9).length * (2 * 2);
		// Rough area check of the raster (2°×2° cells, cos dec ≈ 0.87 near dec −30): within 30% of the map's area.
		expect(cells90 * 0.87).toBeGreaterThan(e.areasDeg2['0.9'] * 0.7);
		expect(cells90 * 0.87).toBeLessThan(e.areasDeg2['0.9'] * 1.3);
		expect(JSON.parse(JSON.stringify(r)).width).toBe(180);
	});
});

describe('flat maps written by healpy', () => {
	it('RING nside 64 with float32 distance columns', () => {
		expect.hasAssertions();
		const e = expected.flatRing;
		const s = analyseSkymap(file('flat_ring_map.fits'));
		expect(s.ordering).toBe('RING');
		expect(s.pixels).toBe(12 * 64 * 64);
		expect(s.maxOrder).toBe(6);
		for (const [k, v] of [['0.5', s.area50], ['0.9', s.area90], ['0.99', s.area99]] as const) {
			expect(rel(v, e.areasDeg2[k])).toBeLessThan(1e-3);
		}
		expect(s.peak.ra).toBeCloseTo(e.peak.ra, 9);
		expect(s.peak.dec).toBeCloseTo(e.peak.dec, 9);
		expect(rel(s.distanceMean!, e.distanceMean)).toBeLessThan(1e-3);
		expect(rel(s.distanceStd!, e.distanceStd)).toBeLessThan(1e-3);
		for (const p of e.probes) {
			expect(pixelAt(s.map, p.ra, p.dec)).toBe(p.ipix);
			const r = locate(s.map, p.ra, p.dec);
			expect(rel(r.probabilityDensity, p.probDensity)).toBeLessThan(1e-9);
			expect(r.credibleLevel).toBeCloseTo(p.credibleLevel, 9);
			expect(rel(r.distanceMean!, p.distanceMean)).toBeLessThan(1e-5);
			expect(rel(r.distanceStd!, p.distanceStd)).toBeLessThan(1e-5);
		}
	});

	it('NESTED nside 16, not normalised: warns, normalises, areas and levels match', () => {
		expect.hasAssertions();
		const e = expected.flatNested;
		const s = analyseSkymap(file('flat_nested_map.fits'));
		expect(s.ordering).toBe('NESTED');
		expect(s.probabilitySum).toBeCloseTo(e.probabilitySum, 5);
		expect(s.warnings.join(' ')).toMatch(/total probability was 1\.7/);
		expect(rel(s.area90, e.areasDeg2['0.9'])).toBeLessThan(1e-3);
		for (const p of e.probes) {
			expect(pixelAt(s.map, p.ra, p.dec)).toBe(p.ipix);
			expect(locate(s.map, p.ra, p.dec).credibleLevel).toBeCloseTo(p.credibleLevel, 6);
		}
	});
});

describe('flat float64 map read in place (reuseInput)', () => {
	// Expected areas: full numpy sort + cumsum in tests/fixtures/sky/make_flat_f64.py (healpy 1.16.1 wrote the map).
	const e = JSON.parse(readFileSync(new URL('flat_ring_f64.json', dir), 'utf8'));

	it('gives the same map as a copying read, as a view into the given bytes', () => {
		expect.hasAssertions();
		const copied = analyseSkymap(file('flat_ring_f64.fits'));
		const bytes = file('flat_ring_f64.fits');
		const inPlace = analyseSkymap(bytes, { reuseInput: true });
		expect(inPlace.map.probDensity.buffer).toBe(bytes.buffer);
		expect(copied.map.probDensity.buffer).not.toBe(bytes.buffer);
		expect(Array.from(inPlace.map.probDensity)).toEqual(Array.from(copied.map.probDensity));
		for (const s of [copied, inPlace]) {
			expect(s.probabilitySum).toBeCloseTo(e.probabilitySum, 12);
			expect(s.warnings.join(' ')).toMatch(/total probability was 2\.00000/);
			for (const [k, v] of [['0.5', s.area50], ['0.9', s.area90], ['0.99', s.area99]] as const) expect(rel(v, e.areasDeg2[k])).toBeLessThan(1e-12);
			expect(rel(Math.max(...s.map.probDensity), e.maxDensityPerSr)).toBeLessThan(1e-12);
		}
	});

	it('leaves the bytes alone without the option', () => {
		expect.hasAssertions();
		const bytes = file('flat_ring_f64.fits');
		const before = bytes.slice();
		readSkyMap(bytes);
		expect(Buffer.compare(bytes, before)).toBe(0);
	});

	it('refuses to decode a table a second time once it was swapped in place', () => {
		expect.hasAssertions();
		const fits = readFits(file('flat_ring_f64.fits'), { reuseInput: true });
		const hdu = fits.hdus[1];
		readBinTable(fits, hdu);
		expect(() => readBinTable(fits, hdu)).toThrow(/already decoded in place/);
	});
});

describe('bad map contents', () => {
	const uniqOf = (order: number) => Float64Array.from({ length: 12 * 4 ** order }, (_, i) => 4 * 4 ** order + i);

	it('NaN and negative densities are zeroed and counted', () => {
		expect.hasAssertions();
		const n = 12 * 4;
		const dens = new Float64Array(n).fill(1 / (4 * Math.PI));
		dens[3] = NaN;
		dens[7] = -5;
		const bytes = writeBinTableFits(
			[
				{ name: 'UNIQ', code: 'K', data: uniqOf(1) },
				{ name: 'PROBDENSITY', code: 'D', data: dens }
			],
			[['ORDERING', 'NUNIQ']]
		);
		const s = analyseSkymap(bytes);
		expect(s.warnings.join(' ')).toMatch(/2 pixel\(s\) had NaN/);
		expect(s.map.probDensity[3]).toBe(0);
		expect(s.map.probDensity[7]).toBe(0);
		// 46 equal pixels remain: 90% needs ⌈0.9·46⌉ = 42 of them, each 41252.96/48 deg².
		expect(s.area90).toBeCloseTo((42 * 41252.96124941927) / 48, 6);
	});

	it('orders above 24 are refused with a clear message', () => {
		expect.hasAssertions();
		const bytes = writeBinTableFits(
			[
				{ name: 'UNIQ', code: 'K', data: BigInt64Array.from([4n * 4n ** 26n]) },
				{ name: 'PROBDENSITY', code: 'D', data: Float64Array.from([1]) }
			],
			[['ORDERING', 'NUNIQ']]
		);
		expect(() => readSkyMap(bytes)).toThrow(/order 26 is above the supported maximum 24/);
	});

	it('missing ORDERING and wrong NSIDE are refused', () => {
		expect.hasAssertions();
		const prob = new Float64Array(48).fill(1 / 48);
		expect(() => readSkyMap(writeBinTableFits([{ name: 'PROB', code: 'D', data: prob }]))).toThrow(/missing keyword ORDERING/);
		expect(() =>
			readSkyMap(writeBinTableFits([{ name: 'PROB', code: 'D', data: prob }], [['ORDERING', 'RING'], ['NSIDE', 4]]))
		).toThrow(/NSIDE = 4 needs 192 pixels/);
	});
});
