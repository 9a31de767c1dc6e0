import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { mulberry32 } from '../../../fake-alert-broker/prng.ts';
import { nestToRadec, npix, pixelAreaSr, readSkyMap, ringToNest, type SkyMap } from '../sky/index.ts';
import { coverage, galaxyCoverage, PIXEL_RADIUS_FACTOR, type ObservedFootprint } from './coverage.ts';
import { footprintContains, footprintGeometry } from './sky-geometry.ts';

const FIXTURE = 'tests/fixtures/coverage/reference.json';
const SKY = 'tests/fixtures/sky';

interface RefMap {
	union: number;
	sumOfOverlaps: number;
	footprint: Record<string, number>;
	groups: Record<string, number>;
	curve: { id: string; minutes: number; union: number }[];
}
interface Reference {
	referenceOrder: number;
	footprints: ({ id: string; group: string; minutesAfterMerger: number; raDeg: number; decDeg: number } & (
		| { shape: 'rectangle'; widthDeg: number; heightDeg: number }
		| { shape: 'circle'; diameterDeg: number }
	))[];
	maps: Record<string, RefMap>;
}

const ref: Reference = JSON.parse(readFileSync(FIXTURE, 'utf8'));
const MERGER_MS = Date.parse('2026-03-01T04:00:00Z');
const observed: ObservedFootprint[] = ref.footprints.map((f) => {
	const base = { id: f.id, groupId: f.group, timeMs: MERGER_MS + f.minutesAfterMerger * 60_000, raDeg: f.raDeg, decDeg: f.decDeg };
	return f.shape === 'rectangle' ? { ...base, shape: 'rectangle', widthDeg: f.widthDeg, heightDeg: f.heightDeg } : { ...base, shape: 'circle', diameterDeg: f.diameterDeg };
});
const maps: Record<string, SkyMap> = Object.fromEntries(
	Object.keys(ref.maps).map((name) => [name, readSkyMap(new Uint8Array(readFileSync(`${SKY}/${name}`)))])
);

/** A map of constant density, flat NESTED at `order`. */
function uniformMap(order: number): SkyMap {
	const n = npix(order);
	return {
		ordering: 'NESTED',
		size: n,
		order: null,
		ipix: null,
		probDensity: new Float64Array(n).fill(1 / (4 * Math.PI)),
		distMu: null,
		distSigma: null,
		distNorm: null,
		minOrder: order,
		maxOrder: order,
		probabilitySumRaw: 1,
		coverage: 1,
		warnings: []
	};
}

/** Flat NESTED map at `order` from a flat RING map at a coarser order (each pixel's density copied to its children). */
function refined(map: SkyMap, order: number): SkyMap {
	const f = 4 ** (order - map.maxOrder);
	const d = new Float64Array(npix(order));
	for (let i = 0; i < map.size; i++) {
		const nest = ringToNest(map.maxOrder, i);
		d.fill(map.probDensity[i], nest * f, nest * f + f);
	}
	return { ...uniformMap(order), probDensity: d };
}

/** Brute force: every pixel of a flat NESTED map at `order` counted by its centre. */
function bruteUnion(map: SkyMap, fps: ObservedFootprint[]): number {
	const g = fps.map((f) => footprintGeometry(f));
	const a = pixelAreaSr(map.maxOrder);
	let s = 0;
	for (let i = 0; i < map.size; i++) {
		const c = nestToRadec(map.maxOrder, i);
		if (g.some((x) => footprintContains(x, c.ra, c.dec))) s += map.probDensity[i] * a;
	}
	return s;
}

describe('coverage vs healpy (tests/fixtures/coverage, healpy 1.16.1 query_polygon/query_disc, inclusive=False)', () => {
	for (const [name, r] of Object.entries(ref.maps)) {
		it(`${name}: at the reference order the union, groups, footprints and curve match healpy's pixel sets`, () => {
			expect.hasAssertions();
			const c = coverage(maps[name], observed, { evaluationOrder: ref.referenceOrder, mergerTimeMs: MERGER_MS });
			expect(c.evaluationOrder).toBe(10);
			// The same pixel-centre rule on the same pixels: only float rounding may differ.
			expect(Math.abs(c.union - r.union)).toBeLessThan(1e-9);
			expect(Math.abs(c.sumOfFootprints - r.sumOfOverlaps)).toBeLessThan(1e-9);
			for (const g of c.groups) expect(Math.abs(g.union - r.groups[g.groupId])).toBeLessThan(1e-9);
			expect(c.groups.map((g) => g.groupId).sort()).toEqual(Object.keys(r.groups).sort());
			for (const f of c.footprints) expect(Math.abs(f.probability - r.footprint[f.id])).toBeLessThan(1e-9);
			expect(c.curve.map((p) => p.id)).toEqual(r.curve.map((p) => p.id));
			c.curve.forEach((p, k) => {
				expect(Math.abs(p.union - r.curve[k].union)).toBeLessThan(1e-9);
				expect(p.sinceMergerS).toBeCloseTo(r.curve[k].minutes * 60, 6);
			});
		});

		it(`${name}: at the default order the union is within the stated pixelisation error of healpy's`, () => {
			expect.hasAssertions();
			const fine = coverage(maps[name], observed);
			const atRef = coverage(maps[name], observed, { evaluationOrder: ref.referenceOrder });
			// Smallest footprint 1°: side ≤ 1°/32 → order 11 (0.029°) for its edges.
			expect(fine.evaluationOrder).toBe(11);
			// Both are within their own bound of the exact union, so they differ by at most the sum.
			expect(Math.abs(fine.union - r.union)).toBeLessThanOrEqual(fine.errorBound + atRef.errorBound);
			// The bound is a worst case (every edge pixel wrongly counted, here a strip 0.5° wide round an
			// 8° cap on the densest part of the map); the actual difference is far smaller.
			expect(fine.errorBound).toBeLessThan(0.05);
			expect(Math.abs(fine.union - r.union)).toBeLessThan(1e-3);
			console.info(`${name}: union ${fine.union.toFixed(5)} vs healpy ${r.union.toFixed(5)} (bound ${fine.errorBound.toFixed(4)})`);
			for (const g of fine.groups) {
				const gRef = atRef.groups.find((x) => x.groupId === g.groupId)!;
				expect(Math.abs(g.union - r.groups[g.groupId])).toBeLessThanOrEqual(g.errorBound + gRef.errorBound);
			}
		});

		it(`${name}: the sum of overlaps is not the union; unions are monotone in time`, () => {
			expect.hasAssertions();
			const c = coverage(maps[name], observed, { mergerTimeMs: MERGER_MS });
			// Overlapping footprints on purpose: the healpy sum of overlaps is 0.48 against a union of 0.31.
			expect(c.sumOfFootprints - c.union).toBeGreaterThan(0.1);
			expect(r.sumOfOverlaps - r.union).toBeGreaterThan(0.1);
			for (let k = 1; k < c.curve.length; k++) {
				expect(c.curve[k].union).toBeGreaterThanOrEqual(c.curve[k - 1].union);
				expect(c.curve[k].timeMs).toBeGreaterThanOrEqual(c.curve[k - 1].timeMs);
			}
			expect(c.curve.at(-1)!.union).toBe(c.union);
			// The union is at least each group's union and at most their sum.
			const groups = c.groups.map((g) => g.union);
			expect(c.union).toBeGreaterThanOrEqual(Math.max(...groups));
			expect(c.union).toBeLessThanOrEqual(groups.reduce((a, b) => a + b, 0) + 1e-12);
			// o9 (1°×1°) sits inside o1 and o4, which came first: it adds nothing (healpy agrees).
			const i9 = c.curve.findIndex((p) => p.id === 'o9');
			expect(c.curve[i9].union).toBe(c.curve[i9 - 1].union);
			expect(r.curve[i9].union).toBe(r.curve[i9 - 1].union);
		});
	}
});

describe('coverage: geometry and pruning against independent computations', () => {
	it('the pixel circumradius used covers healpy max_pixrad and the sampled pixel boundaries (orders 0–6)', () => {
		expect.hasAssertions();
		const radii: { order: number; maxBoundaryRadiusOverSide: number; maxPixradOverSide: number }[] = JSON.parse(readFileSync(FIXTURE, 'utf8')).pixelRadius;
		expect(radii).toHaveLength(7);
		for (const r of radii) {
			expect(PIXEL_RADIUS_FACTOR).toBeGreaterThan(r.maxBoundaryRadiusOverSide);
			expect(PIXEL_RADIUS_FACTOR).toBeGreaterThan(r.maxPixradOverSide);
		}
	});

	it('a uniform map: a cap covers (1 − cos ρ)/2 (the cap area 2π(1 − cos ρ)), within the stated bound', () => {
		expect.hasAssertions();
		const map = uniformMap(4);
		for (const [ra, dec, d] of [
			[0.2, 10, 6],
			[45, 89.5, 4],
			[300, -60, 12]
		]) {
			const c = coverage(map, [{ id: 'c', groupId: 'g', timeMs: 0, shape: 'circle', raDeg: ra, decDeg: dec, diameterDeg: d }], { pixelsAcross: 128 });
			const exact = (1 - Math.cos(((d / 2) * Math.PI) / 180)) / 2;
			expect(Math.abs(c.union - exact)).toBeLessThanOrEqual(c.errorBound);
			expect(c.errorBound).toBeLessThan(0.1 * exact);
			expect(Math.abs(c.union - exact)).toBeLessThan(0.002 * exact);
		}
	});

	it('a uniform map: a w×h gnomonic rectangle covers its spherical-excess area / 4π (Girard), within the bound', () => {
		expect.hasAssertions();
		const map = uniformMap(4);
		for (const [ra, dec, w, h] of [
			[359.5, 0, 5, 3],
			[120, 88, 4, 6],
			[10, -45, 10, 2]
		]) {
			// Girard: area = Σ interior angles − 2π. The corner angle of a centred gnomonic rectangle,
			// from the side normals n = (t c ∓ e)/√(1+t²): cos(π − A) = −n₁·n₂ = tw·th / √((1+tw²)(1+th²)).
			const tw = Math.tan(((w / 2) * Math.PI) / 180);
			const th = Math.tan(((h / 2) * Math.PI) / 180);
			const angle = Math.PI - Math.acos((tw * th) / Math.sqrt((1 + tw * tw) * (1 + th * th)));
			const exact = (4 * angle - 2 * Math.PI) / (4 * Math.PI);
			const c = coverage(map, [{ id: 'r', groupId: 'g', timeMs: 0, shape: 'rectangle', raDeg: ra, decDeg: dec, widthDeg: w, heightDeg: h }], { pixelsAcross: 128 });
			expect(Math.abs(c.union - exact)).toBeLessThanOrEqual(c.errorBound);
			expect(Math.abs(c.union - exact)).toBeLessThan(0.002 * exact);
			// w·h deg² is a first approximation; the excess formula must be close to it for small fields.
			expect(exact * 41252.96).toBeCloseTo(w * h, -0.5);
		}
	});

	it('pruning and sub-pixelisation give the same union as testing every pixel (RA wrap, pole, overlaps)', () => {
		expect.hasAssertions();
		const random = mulberry32(7);
		const fps: ObservedFootprint[] = [
			{ id: 'a', groupId: 'x', timeMs: 3, shape: 'rectangle', raDeg: 359, decDeg: 2, widthDeg: 6, heightDeg: 4 },
			{ id: 'b', groupId: 'y', timeMs: 1, shape: 'circle', raDeg: 1.5, decDeg: 0, diameterDeg: 5 },
			{ id: 'c', groupId: 'x', timeMs: 2, shape: 'rectangle', raDeg: 77, decDeg: 87.5, widthDeg: 8, heightDeg: 8 },
			{ id: 'd', groupId: 'y', timeMs: 2, shape: 'circle', raDeg: 250, decDeg: 89, diameterDeg: 6 }
		];
		// A lumpy map at order 4, evaluated at order 7, against brute force over the order-7 pixels.
		const coarse = uniformMap(4);
		for (let i = 0; i < coarse.size; i++) coarse.probDensity[i] = random();
		const fine = uniformMap(7);
		for (let i = 0; i < fine.size; i++) fine.probDensity[i] = coarse.probDensity[i >> 6];
		const c = coverage(coarse, fps, { evaluationOrder: 7 });
		expect(Math.abs(c.union - bruteUnion(fine, fps))).toBeLessThan(1e-12);
		for (const g of c.groups) {
			expect(Math.abs(g.union - bruteUnion(fine, fps.filter((f) => f.groupId === g.groupId)))).toBeLessThan(1e-12);
		}
		// Time order: b (t=1), then c and d (t=2, input order), then a.
		expect(c.curve.map((p) => p.id)).toEqual(['b', 'c', 'd', 'a']);
		expect(Math.abs(c.curve[0].union - bruteUnion(fine, [fps[1]]))).toBeLessThan(1e-12);
		expect(c.union).toBeGreaterThan(0);
	});

	it('no footprints: nothing covered', () => {
		expect.hasAssertions();
		const c = coverage(maps['flat_ring_map.fits'], []);
		expect(c.union).toBe(0);
		expect(c.curve).toEqual([]);
		expect(c.groups).toEqual([]);
	});

	it('200 footprints on a 196 608-pixel map in under 200 ms', () => {
		expect.hasAssertions();
		const map = refined(maps['flat_ring_map.fits'], 7);
		expect(map.size).toBe(196_608);
		const random = mulberry32(20260301);
		const fps: ObservedFootprint[] = Array.from({ length: 200 }, (_, k) => {
			const base = { id: `f${k}`, groupId: `team-${k % 7}`, timeMs: k * 60_000, raDeg: 150 + 30 * (random() - 0.5), decDeg: -30 + 20 * (random() - 0.5) };
			return k % 3 === 0
				? { ...base, shape: 'circle', diameterDeg: 1 + 4 * random() }
				: { ...base, shape: 'rectangle', widthDeg: 1 + 4 * random(), heightDeg: 1 + 4 * random() };
		});
		coverage(map, fps.slice(0, 20)); // warm-up (JIT)
		const runs: number[] = [];
		let result = coverage(map, fps);
		for (let k = 0; k < 3; k++) {
			const t0 = performance.now();
			result = coverage(map, fps);
			runs.push(performance.now() - t0);
		}
		const best = Math.min(...runs);
		console.info(`coverage: 200 footprints, ${map.size} pixels, order ${result.evaluationOrder}: ${runs.map((t) => t.toFixed(0)).join(' / ')} ms, union ${result.union.toFixed(4)} ± ${result.errorBound.toExponential(1)}`);
		expect(best).toBeLessThan(200);
		expect(result.union).toBeGreaterThan(0.5);
		expect(result.union).toBeLessThanOrEqual(result.sumOfFootprints);
	});
});

describe('galaxyCoverage', () => {
	const galaxies = [
		{ id: 'g1', ra: 150, dec: -30, probability: 0.4 },
		{ id: 'g2', ra: 150.5, dec: -30.2, probability: 0.25 },
		{ id: 'g3', ra: 170, dec: -10, probability: 0.2 },
		{ id: 'g4', ra: 10, dec: 40, probability: 0.15 }
	];

	it('named galaxies: the observed share of the ranked probability', () => {
		expect.hasAssertions();
		const c = galaxyCoverage(galaxies, { galaxyIds: ['g2', 'g4', 'not-ranked'] });
		expect(c.observedCount).toBe(2);
		expect(c.observedProbability).toBeCloseTo(0.25 + 0.15, 12);
		expect(c.fraction).toBeCloseTo(0.4 / 1.0, 12);
	});

	it('galaxies inside footprints count once, per group and in time order; a truncated list is its own total', () => {
		expect.hasAssertions();
		const fps: ObservedFootprint[] = [
			{ id: 'late', groupId: 'b', timeMs: 20, shape: 'circle', raDeg: 150, decDeg: -30, diameterDeg: 3 },
			{ id: 'early', groupId: 'a', timeMs: 10, shape: 'rectangle', raDeg: 150, decDeg: -30, widthDeg: 0.5, heightDeg: 0.5 }
		];
		const c = galaxyCoverage(galaxies.slice(0, 3), { footprints: fps, galaxyIds: ['g3'] });
		// g1 in both, g2 only in the circle (0.5° east and 0.2° south of the centre), g3 named.
		expect(c.totalProbability).toBeCloseTo(0.85, 12);
		expect(c.observedProbability).toBeCloseTo(0.85, 12);
		expect(c.fraction).toBeCloseTo(1, 12);
		expect(Object.fromEntries(c.groups.map((g) => [g.groupId, g.count]))).toEqual({ a: 1, b: 2 });
		expect(c.curve.map((p) => p.id)).toEqual(['early', 'late']);
		expect(c.curve[0].probability).toBeCloseTo(0.2 + 0.4, 12);
		expect(c.curve[1].fraction).toBeCloseTo(1, 12);
	});
});
