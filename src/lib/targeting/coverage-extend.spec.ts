/**
 * `extendCoverage` (adding footprints to a coverage result) against `coverage` over all the
 * footprints at once. The full computation is itself checked against healpy in coverage.spec.ts;
 * here the incremental one must give the same figures: to rounding with a fixed evaluation order
 * (both count the same evaluation pixels by their centres), within the two error bounds with
 * the default per-footprint orders.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { mulberry32 } from '../../../fake-alert-broker/prng.ts';
import { npix, readSkyMap, ringToNest, type SkyMap } from '../sky/index.ts';
import { coverage, coverageWithState, extendCoverage, type Coverage, type ObservedFootprint } from './coverage.ts';

const SKY = 'tests/fixtures/sky';
const ringMap = readSkyMap(new Uint8Array(readFileSync(`${SKY}/flat_ring_map.fits`)));
const mocMap = readSkyMap(new Uint8Array(readFileSync(`${SKY}/moc_map.fits`)));

/** Flat NESTED map at `order` from the flat RING fixture (each pixel's density copied to its children). */
function nested(order: number): SkyMap {
	const f = 4 ** (order - ringMap.maxOrder);
	const d = new Float64Array(npix(order));
	for (let i = 0; i < ringMap.size; i++) {
		const nest = ringToNest(ringMap.maxOrder, i);
		d.fill(ringMap.probDensity[i], nest * f, nest * f + f);
	}
	return { ...ringMap, ordering: 'NESTED', size: d.length, probDensity: d, minOrder: order, maxOrder: order };
}

/** Random footprints of 1–5° round (150, −30), where the fixtures' probability is, `minutes` apart from `t0`. */
function footprints(n: number, seed: number, t0: number, groups = 7, prefix = 'f'): ObservedFootprint[] {
	const random = mulberry32(seed);
	return Array.from({ length: n }, (_, k) => {
		const base = { id: `${prefix}${k}`, groupId: `team-${Math.floor(random() * groups)}`, timeMs: t0 + k * 60_000, raDeg: 150 + 30 * (random() - 0.5), decDeg: -30 + 20 * (random() - 0.5) };
		return random() < 0.35
			? { ...base, shape: 'circle', diameterDeg: 1 + 4 * random() }
			: { ...base, shape: 'rectangle', widthDeg: 1 + 4 * random(), heightDeg: 1 + 4 * random() };
	});
}

/** Every figure of `a` within `tol` of `b`'s (same footprints, same order of inputs). */
function expectSame(a: Coverage, b: Coverage, tol: number) {
	expect(Math.abs(a.union - b.union)).toBeLessThanOrEqual(tol);
	expect(Math.abs(a.sumOfFootprints - b.sumOfFootprints)).toBeLessThanOrEqual(tol * 10);
	expect(a.curve.map((p) => p.id)).toEqual(b.curve.map((p) => p.id));
	a.curve.forEach((p, k) => expect(Math.abs(p.union - b.curve[k].union)).toBeLessThanOrEqual(tol));
	expect(a.footprints.map((f) => f.id)).toEqual(b.footprints.map((f) => f.id));
	a.footprints.forEach((f, k) => expect(Math.abs(f.probability - b.footprints[k].probability)).toBeLessThanOrEqual(tol));
	expect(a.groups.map((g) => g.groupId)).toEqual(b.groups.map((g) => g.groupId));
	a.groups.forEach((g, k) => {
		expect(g.observations).toBe(b.groups[k].observations);
		expect(Math.abs(g.union - b.groups[k].union)).toBeLessThanOrEqual(tol);
		g.curve.forEach((p, j) => expect(Math.abs(p.union - b.groups[k].curve[j].union)).toBeLessThanOrEqual(tol));
	});
}

describe('extendCoverage', () => {
	it('fixed evaluation order: 200 old + 50 new equals the full computation to rounding, on RING, NESTED and multi-order maps', () => {
		expect.hasAssertions();
		const old = footprints(200, 11, 0);
		const added = footprints(50, 12, 200 * 60_000, 9, 'n'); // two groups the old ones do not have
		for (const map of [ringMap, nested(7), mocMap]) {
			const options = { evaluationOrder: 9, mergerTimeMs: -3_600_000 };
			const { state } = coverageWithState(map, old, options);
			const ext = extendCoverage(map, state, added, options);
			expect(ext.mode).toBe('extended');
			const full = coverage(map, [...old, ...added], options);
			expectSame(ext.coverage, full, 1e-12);
			expect(ext.coverage.groups.length).toBeGreaterThan(7);
			// The bound: its own contribution only where the added footprints are; never below the full one's.
			expect(ext.coverage.errorBound).toBeGreaterThanOrEqual(full.errorBound - 1e-12);
			// Only the added footprints' pixels were tested again.
			expect(ext.coverage.leavesTested).toBeLessThan(full.leavesTested);
		}
	});

	it('extensions one after another (one footprint, then several with ties in time) equal the full computation', () => {
		expect.hasAssertions();
		const map = nested(7);
		const all = footprints(120, 21, 0);
		// Batches: 60, then 1, then 1 at the same minute as the last, then the rest.
		all[61] = { ...all[61], timeMs: all[60].timeMs };
		const options = { evaluationOrder: 9 };
		let { state } = coverageWithState(map, all.slice(0, 60), options);
		let last: Coverage | null = null;
		for (const [a, b] of [
			[60, 61],
			[61, 62],
			[62, 120]
		]) {
			const ext = extendCoverage(map, state, all.slice(a, b), options);
			expect(ext.mode).toBe('extended');
			state = ext.state;
			last = ext.coverage;
		}
		expect(state.extensions).toBe(3);
		expectSame(last!, coverage(map, all, options), 1e-12);
	});

	it('default orders: within the two error bounds of the full computation, and at least as wide a bound', () => {
		expect.hasAssertions();
		const map = nested(7);
		const old = footprints(200, 31, 0);
		const added = footprints(50, 32, 200 * 60_000);
		const ext = extendCoverage(map, coverageWithState(map, old).state, added);
		const full = coverage(map, [...old, ...added]);
		const diff = Math.abs(ext.coverage.union - full.union);
		console.info(`200 + 50 footprints, default orders: |extended − full| = ${diff.toExponential(2)}, bounds ${ext.coverage.errorBound.toExponential(2)} / ${full.errorBound.toExponential(2)}`);
		expect(diff).toBeLessThanOrEqual(ext.coverage.errorBound + full.errorBound);
		ext.coverage.curve.forEach((p, k) => expect(Math.abs(p.union - full.curve[k].union)).toBeLessThanOrEqual(ext.coverage.errorBound + full.errorBound));
		ext.coverage.groups.forEach((g, k) => expect(Math.abs(g.union - full.groups[k].union)).toBeLessThanOrEqual(g.errorBound + full.groups[k].errorBound));
		// In practice far closer than the worst case.
		expect(diff).toBeLessThan(0.1 * full.errorBound + 1e-9);
		expect(ext.coverage.errorBound).toBeGreaterThanOrEqual(full.errorBound);
	});

	it('an added footprint earlier than the latest one: computed afresh, equal to the full computation', () => {
		expect.hasAssertions();
		const map = nested(7);
		const old = footprints(80, 41, 0);
		const early = { ...footprints(1, 42, 0, 7, 'early')[0], timeMs: 30 * 60_000 + 1 };
		const ext = extendCoverage(map, coverageWithState(map, old).state, [early]);
		expect(ext.mode).toBe('recomputed');
		expect(ext.state.extensions).toBe(0);
		expectSame(ext.coverage, coverage(map, [...old, early]), 0);
		// Different options also start afresh; nothing added changes nothing.
		expect(extendCoverage(map, ext.state, footprints(1, 43, 10 ** 9), { pixelsAcross: 8 }).mode).toBe('recomputed');
		const same = extendCoverage(map, ext.state, []);
		expect(same.mode).toBe('unchanged');
		expectSame(same.coverage, ext.coverage, 0);
	});

	it('9,000 footprints + 1 appended: the same figures as all 9,000 + 1 at once, visiting a few pixels', () => {
		expect.hasAssertions();
		const map = nested(7);
		// A grid of 1° fields over the probable region, as a survey's upload would be.
		const grid: ObservedFootprint[] = Array.from({ length: 9000 }, (_, i) => ({
			id: `g${i}`,
			groupId: `team-${i % 3}`,
			timeMs: i * 4_000,
			shape: 'rectangle',
			raDeg: 150 + ((i % 90) - 45) * 0.8,
			decDeg: -30 + (Math.floor(i / 90) - 50) * 0.4,
			widthDeg: 1,
			heightDeg: 1
		}));
		const one: ObservedFootprint = { id: 'extra', groupId: 'team-9', timeMs: 9000 * 4_000, shape: 'circle', raDeg: 151.3, decDeg: -29.1, diameterDeg: 2 };
		const options = { evaluationOrder: 10 };
		let t = performance.now();
		const base = coverageWithState(map, grid, options);
		const fullMs = performance.now() - t;
		t = performance.now();
		const ext = extendCoverage(map, base.state, [one], options);
		const extMs = performance.now() - t;
		const full = coverage(map, [...grid, one], options);
		console.info(`9,000 + 1 footprints: full ${fullMs.toFixed(0)} ms, extension ${extMs.toFixed(0)} ms (leaves ${full.leavesTested} vs ${ext.coverage.leavesTested})`);
		expectSame(ext.coverage, full, 1e-11);
		expect(ext.coverage.curve.at(-1)!.union).toBeGreaterThanOrEqual(ext.coverage.curve.at(-2)!.union);
		expect(ext.coverage.leavesTested).toBeLessThan(full.leavesTested / 100);
	});
});
