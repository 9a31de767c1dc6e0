import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { locate, normalCdf, normalPdf, pixelAt, readSkyMap, credibleRegions, summarise, type SkyMap } from '../sky/index.ts';
import { parseCatalogCsv } from './catalog-csv.ts';
import {
	B_LUMINOSITY_DENSITY_L10_PER_MPC3,
	buildCatalogIndex,
	expectedDistanceKernel,
	INDEX_ORDER,
	rankGalaxies,
	type GalaxyCatalog
} from './galaxies.ts';

const FIX = new URL('../../../tests/fixtures/', import.meta.url);
const mapOf = (name: string): SkyMap => readSkyMap(new Uint8Array(readFileSync(new URL(`sky/${name}`, FIX))));

function fixtureCatalog(): GalaxyCatalog {
	const r = parseCatalogCsv(readFileSync(new URL('targeting/synthetic_catalog_20k.csv', FIX), 'utf8'));
	if (!r.ok || !r.catalog) throw new Error(`fixture catalogue did not parse: ${r.fatal}`);
	return r.catalog;
}

interface Reference {
	densityThreshold: number;
	regionAreaDeg2: number;
	inRegion: number;
	withoutDistance: number;
	candidates: number;
	totalScore: number;
	top: { id: string; score: number; probability: number }[];
	equalWeightsNoErrorTop: { id: string; score: number }[];
	equalWeightsCandidates: number;
	closedFormVsQuadMaxRelDiff: number;
}
const reference = JSON.parse(readFileSync(new URL('targeting/reference_ranking.json', FIX), 'utf8')) as Reference;

/** Same order as the reference, allowing swaps only between scores equal to 1e-12 (relative). */
function expectSameOrder(ours: { id: string; score: number }[], ref: { id: string; score: number }[]) {
	expect(ours.length).toBe(ref.length);
	for (let k = 0; k < ref.length; k++) {
		if (ours[k].id !== ref[k].id) {
			const tied = ref.findIndex((g) => g.id === ours[k].id);
			expect(tied, `rank ${k + 1}: ${ours[k].id} vs ${ref[k].id}`).toBeGreaterThanOrEqual(0);
			expect(Math.abs(ref[tied].score / ref[k].score - 1)).toBeLessThan(1e-12);
		}
	}
}

describe('rankGalaxies against the brute-force numpy/healpy reference (tests/fixtures/targeting/make_reference.py)', () => {
	const map = mapOf('moc_map.fits');
	const catalog = fixtureCatalog();
	const index = buildCatalogIndex(catalog);

	it('matches the top-100 order, probabilities to 1e-6 and the candidate counts', () => {
		expect.hasAssertions();
		const r = rankGalaxies(map, index, { level: 0.99, limit: 100 });
		expect(r.mode).toBe('3d');
		expect(r.candidates).toBe(reference.candidates);
		expect(r.withoutDistance).toBe(reference.withoutDistance);
		expect(r.regionAreaDeg2).toBeCloseTo(reference.regionAreaDeg2, 6);
		expect(Math.abs(r.totalScore / reference.totalScore - 1)).toBeLessThan(1e-9);
		expectSameOrder(r.galaxies, reference.top);
		for (let k = 0; k < 100; k++) {
			expect(Math.abs(r.galaxies[k].probability - reference.top[k].probability)).toBeLessThan(1e-6);
			expect(Math.abs(r.galaxies[k].score / reference.top[k].score - 1)).toBeLessThan(1e-9);
		}
		// The closed-form distance integral agreed with scipy quadrature in the reference run.
		expect(reference.closedFormVsQuadMaxRelDiff).toBeLessThan(1e-8);
	});

	it('with no distance error and equal weights ranks by dP/dV from the sky engine (and as numpy does)', () => {
		expect.hasAssertions();
		const plain: GalaxyCatalog = {
			...catalog,
			distanceErrMpc: new Float64Array(catalog.size),
			weight: new Float64Array(catalog.size).fill(1),
			weightSource: 'none'
		};
		const r = rankGalaxies(map, buildCatalogIndex(plain), { level: 0.99 });
		expect(r.candidates).toBe(reference.equalWeightsCandidates);
		expectSameOrder(r.galaxies.slice(0, 100), reference.equalWeightsNoErrorTop);
		// Independent path: locate() per galaxy (sky engine dPdV), sorted.
		for (const g of r.galaxies) {
			const l = locate(map, g.ra, g.dec, g.distance);
			expect(Math.abs(g.score / l.dPdV! - 1)).toBeLessThan(1e-12);
		}
		for (let k = 1; k < r.galaxies.length; k++) expect(r.galaxies[k - 1].score).toBeGreaterThanOrEqual(r.galaxies[k].score);
		expect(r.galaxies.at(-1)!.cumulative).toBeCloseTo(1, 12);
	});

	it('finds exactly the galaxies a full scan finds, while reading only the region pixels', () => {
		expect.hasAssertions();
		const [region] = credibleRegions(map, [0.99]);
		let inRegion = 0;
		for (let k = 0; k < catalog.size; k++) {
			const i = pixelAt(map, catalog.raDeg[k], catalog.decDeg[k]);
			if (i >= 0 && map.probDensity[i] >= region.densityThresholdPerSr) inRegion++;
		}
		const r = rankGalaxies(map, index, { level: 0.99 });
		expect(r.candidates + r.withoutDistance + r.zeroScore).toBe(inRegion);
		expect(inRegion).toBe(reference.inRegion);
		// The map has pixels finer (order 9) and coarser than the index order; the cover is tight.
		expect(map.maxOrder).toBeGreaterThan(INDEX_ORDER);
		expect(r.examined).toBeLessThan(1.5 * inRegion);
	});
});

describe('flat maps', () => {
	const catalog = fixtureCatalog();
	const index = buildCatalogIndex(catalog);

	for (const [name, mode] of [
		['flat_ring_map.fits', '3d'],
		['flat_nested_map.fits', '2d']
	] as const) {
		it(`${name}: candidates equal a full scan, score equals ρ·DISTNORM·N or ρ (${mode})`, () => {
			expect.hasAssertions();
			const map = mapOf(name);
			const r = rankGalaxies(map, index, { level: 0.9 });
			expect(r.mode).toBe(mode);
			const [region] = credibleRegions(map, [0.9]);
			const want = new Map<string, number>();
			for (let k = 0; k < catalog.size; k++) {
				const i = pixelAt(map, catalog.raDeg[k], catalog.decDeg[k]);
				if (map.probDensity[i] < region.densityThresholdPerSr) continue;
				let s = map.probDensity[i] * catalog.weight[k];
				if (mode === '3d') {
					const mu = map.distMu![i];
					const sigma = map.distSigma![i];
					const sd = catalog.distanceErrMpc[k];
					// Simpson quadrature of the defining integral (independent of the closed form).
					const d = catalog.distanceMpc[k];
					const hi = Math.max(d, mu) + 12 * Math.max(sigma, sd);
					const n = 20000;
					let acc = 0;
					for (let j = 0; j <= n; j++) {
						const rr = (hi * j) / n;
						const f = (normalPdf((rr - mu) / sigma) / sigma) * (normalPdf((rr - d) / sd) / sd);
						acc += f * (j === 0 || j === n ? 1 : j % 2 ? 4 : 2);
					}
					// Φ from the sky engine (checked against scipy in distance.spec.ts).
					const tail = normalCdf(d / sd);
					s *= (map.distNorm![i] * (acc * hi)) / (3 * n) / tail;
				}
				want.set(catalog.id[k], s);
			}
			expect(r.candidates).toBe(want.size);
			expect(r.candidates).toBeGreaterThan(50);
			for (const g of r.galaxies) expect(Math.abs(g.score / want.get(g.id)! - 1)).toBeLessThan(1e-7);
		});
	}
});

describe('expectedDistanceKernel', () => {
	it('tends to N(d; μ, σ) as the distance error vanishes, and integrates the product of normals', () => {
		expect.hasAssertions();
		const exact = normalPdf((120 - 150) / 40) / 40;
		expect(expectedDistanceKernel(120, 0, 150, 40)).toBe(exact);
		expect(Math.abs(expectedDistanceKernel(120, 1e-6, 150, 40) / exact - 1)).toBeLessThan(1e-9);
		// Far from r = 0 truncation is negligible: N(d; μ, √(σ² + σ_g²)) (convolution of normals).
		const s = Math.hypot(40, 25);
		expect(Math.abs(expectedDistanceKernel(400, 25, 380, 40) / (normalPdf((400 - 380) / s) / s) - 1)).toBeLessThan(1e-12);
		// Near r = 0 the truncation matters: compare with Simpson quadrature.
		const [d, sd, mu, sigma] = [20, 15, 10, 30];
		const n = 20000;
		const hi = 400;
		let acc = 0;
		for (let j = 0; j <= n; j++) {
			const r = (hi * j) / n;
			const f = (normalPdf((r - mu) / sigma) / sigma) * (normalPdf((r - d) / sd) / sd);
			acc += f * (j === 0 || j === n ? 1 : j % 2 ? 4 : 2);
		}
		const quad = (acc * hi) / (3 * n) / normalCdf(d / sd);
		expect(Math.abs(expectedDistanceKernel(d, sd, mu, sigma) / quad - 1)).toBeLessThan(1e-9);
	});
});

describe('completeness hint', () => {
	it('compares catalogued B luminosity with the luminosity density × the region volume', () => {
		expect.hasAssertions();
		const map = mapOf('moc_map.fits');
		const catalog = fixtureCatalog();
		const r = rankGalaxies(map, buildCatalogIndex(catalog), { level: 0.99 });
		const c = r.completeness!;
		const s = summarise(map);
		const r1 = Math.max(0, s.distanceMean! - 2 * s.distanceStd!);
		const r2 = s.distanceMean! + 2 * s.distanceStd!;
		expect(c.distanceRangeMpc[0]).toBeCloseTo(r1, 9);
		expect(c.distanceRangeMpc[1]).toBeCloseTo(r2, 9);
		const volume = ((s.area99 * (Math.PI / 180) ** 2) * (r2 ** 3 - r1 ** 3)) / 3;
		expect(c.volumeMpc3 / volume).toBeCloseTo(1, 9);
		expect(c.expectedLuminosityB10).toBeCloseTo(B_LUMINOSITY_DENSITY_L10_PER_MPC3 * volume, 6);
		// The fixture catalogue has 20k galaxies in a 400 Mpc sphere, far sparser than the real
		// Universe: its B luminosity density is Σw / V_sphere, so the ratio must be about that / j_B.
		let sumL = 0;
		for (const w of catalog.weight) sumL += w;
		const synthetic = sumL / ((4 / 3) * Math.PI * 400 ** 3);
		expect(c.ratio).toBeGreaterThan((0.5 * synthetic) / B_LUMINOSITY_DENSITY_L10_PER_MPC3);
		expect(c.ratio).toBeLessThan((2 * synthetic) / B_LUMINOSITY_DENSITY_L10_PER_MPC3);
	});

	it('is null without B luminosities', () => {
		expect.hasAssertions();
		const map = mapOf('moc_map.fits');
		const catalog = { ...fixtureCatalog(), luminosityB10: null };
		expect(rankGalaxies(map, buildCatalogIndex(catalog)).completeness).toBeNull();
	});
});

describe('rank command', () => {
	it('prints exactly { galaxies: [{ id, ra, dec, distance, score, probability, cumulative }] }, best first', async () => {
		expect.hasAssertions();
		const { default: rank } = await import('../../cli/commands/rank.ts');
		const mapPath = new URL('sky/moc_map.fits', FIX).pathname;
		const csvPath = new URL('targeting/synthetic_catalog_20k.csv', FIX).pathname;
		const out = (await rank.run([mapPath], { catalog: csvPath, limit: '10' })).json as { galaxies: Record<string, unknown>[] };
		expect(Object.keys(out)).toEqual(['galaxies']);
		expect(out.galaxies).toHaveLength(10);
		for (const g of out.galaxies) expect(Object.keys(g)).toEqual(['id', 'ra', 'dec', 'distance', 'score', 'probability', 'cumulative']);
		expect(out.galaxies.map((g) => g.id)).toEqual(reference.top.slice(0, 10).map((g) => g.id));
		await expect(rank.run([mapPath], { catalog: csvPath, columns: 'ra=RAJ2000' })).rejects.toThrow(/column "RAJ2000"/);
		await expect(rank.run([mapPath], { catalog: csvPath, limit: '0' })).rejects.toThrow(/--limit/);
	});
});
