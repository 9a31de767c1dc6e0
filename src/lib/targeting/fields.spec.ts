import { describe, expect, it } from 'vitest';
import { generateSkymap, skymapToFits } from '../../../fake-alert-broker/skymap.ts';
import { mulberry32 } from '../../../fake-alert-broker/prng.ts';
import { credibleRegions, pixelProbabilityFn, readSkyMap, SPHERE_DEG2, type SkyMap } from '../sky/index.ts';
import { cellOf, fieldAt, fieldsContaining, inFootprint, listFields, rankFields, tileSky, type FieldOfView } from './fields.ts';

const FOVS: FieldOfView[] = [
	{ shape: 'rectangle', widthDeg: 3, heightDeg: 3 },
	{ shape: 'rectangle', widthDeg: 7, heightDeg: 2 },
	{ shape: 'rectangle', widthDeg: 0.8, heightDeg: 1.3 },
	{ shape: 'circle', diameterDeg: 2.5 },
	{ shape: 'circle', diameterDeg: 8 }
];

const label = (f: FieldOfView) => (f.shape === 'rectangle' ? `${f.widthDeg}°×${f.heightDeg}°` : `circle ${f.diameterDeg}°`);

function fisherMap(raDeg: number, decDeg: number, widthDeg: number): SkyMap {
	const m = generateSkymap({ components: [{ raDeg, decDeg, widthDeg }], distance: { meanMpc: 100, stdMpc: 30 } });
	return readSkyMap(new Uint8Array(skymapToFits(m, { object: 'S-demo-fields', dateObs: '2026-01-01T00:00:00' })));
}

describe('tileSky', () => {
	for (const fov of FOVS) {
		it(`${label(fov)}: no gaps — random directions, poles, RA wrap and band edges all lie in a footprint`, () => {
			expect.hasAssertions();
			const t = tileSky(fov);
			const random = mulberry32(20261202);
			const probes: [number, number][] = [];
			for (let k = 0; k < 60000; k++) probes.push([360 * random(), (Math.asin(2 * random() - 1) * 180) / Math.PI]);
			for (let k = 0; k < 2000; k++) {
				const ra = 360 * random();
				probes.push([ra, 90 - 0.5 * random()], [ra, -90 + 0.5 * random()], [ra, 90], [ra, -90]);
				const dec = 180 * random() - 90;
				probes.push([0, dec], [359.9999999, dec], [1e-9, dec]);
			}
			for (const r of t.rows) for (let k = 0; k < 20; k++) {
				const ra = 360 * random();
				probes.push([ra, r.decLoDeg], [ra, Math.min(90, r.decHiDeg - 1e-9)]);
				// The corner of a cell: the RA edge between two fields at the band edge.
				const edge = (360 * Math.floor(random() * r.count)) / r.count;
				probes.push([edge, r.decLoDeg], [edge, Math.min(90, r.decHiDeg - 1e-9)]);
			}
			for (const [ra, dec] of probes) {
				// The direction's own cell field must contain it (the proof's claim) …
				expect(inFootprint(t, cellOf(t, ra, dec), ra, dec)).toBe(true);
			}
			// … and a brute-force scan over every field agrees with the neighbour search.
			const all = listFields(t).map((_, f) => f);
			for (let k = 0; k < 150; k++) {
				const [ra, dec] = probes[k * 7];
				const brute = all.filter((f) => inFootprint(t, f, ra, dec));
				expect(fieldsContaining(t, ra, dec).sort((a, b) => a - b)).toEqual(brute);
			}
		});
	}

	it('uses few fields: within 15% of the sphere/field area for rectangles, 20% above π/2 for circles', () => {
		expect.hasAssertions();
		for (const fov of FOVS) {
			const t = tileSky(fov);
			const areaDeg2 = fov.shape === 'rectangle' ? fov.widthDeg * fov.heightDeg : (Math.PI * fov.diameterDeg ** 2) / 4;
			const ratio = (t.fieldCount * areaDeg2) / SPHERE_DEG2;
			expect(ratio).toBeGreaterThan(1);
			// A circle tiled through its inscribed square cannot beat π/2.
			expect(ratio).toBeLessThan(fov.shape === 'rectangle' ? 1.15 : 1.2 * (Math.PI / 2));
		}
	});

	it('gives deterministic, unique ids', () => {
		expect.hasAssertions();
		const a = listFields(tileSky({ shape: 'rectangle', widthDeg: 3, heightDeg: 3 }));
		const b = listFields(tileSky({ shape: 'rectangle', widthDeg: 3, heightDeg: 3 }));
		expect(a).toEqual(b);
		expect(new Set(a.map((f) => f.id)).size).toBe(a.length);
		expect(a[0].id).toBe('W3.0x3.0-R00-F000');
		for (const f of a) expect(f.id).toMatch(/^W3\.0x3\.0-R\d{2}-F\d{3}$/);
		expect(fieldAt(tileSky({ shape: 'circle', diameterDeg: 2.5 }), 0).id).toBe('C2.5-R000-F000');
		expect(tileSky({ shape: 'rectangle', widthDeg: 3, heightDeg: 3 }, { overlapDeg: 0.3 }).prefix).toBe('W3.0x3.0o0.3');
		expect(() => tileSky({ shape: 'circle', diameterDeg: 0 })).toThrow(RangeError);
	});
});

describe('rankFields', () => {
	it('cell probabilities add up to the probability evaluated: 1 for the whole map, the region’s for a level', () => {
		expect.hasAssertions();
		const map = fisherMap(150, -30, 4);
		// A large field keeps the whole-sky evaluation (order 8, 786k points) quick.
		const t = tileSky({ shape: 'rectangle', widthDeg: 8, heightDeg: 8 });
		const whole = rankFields(map, t, { level: 1 });
		const cells = whole.fields.reduce((s, f) => s + f.cellProbability, 0);
		expect(whole.evaluationOrder).toBe(8);
		expect(whole.probabilityEvaluated).toBeCloseTo(1, 10);
		expect(cells).toBeCloseTo(1, 10);
		expect(whole.fields.at(-1)!.cumulative).toBeCloseTo(1, 10);
		// Enclosed ≥ cell (the cell lies in the footprint); the sum exceeds 1 by the overlaps.
		for (const f of whole.fields) expect(f.probability).toBeGreaterThanOrEqual(f.cellProbability - 1e-15);
		const [r90] = credibleRegions(map, [0.9]);
		const prob = pixelProbabilityFn(map);
		let in90 = 0;
		for (let i = 0; i < map.size; i++) if (map.probDensity[i] >= r90.densityThresholdPerSr) in90 += prob(i);
		const part = rankFields(map, t, { level: 0.9 });
		expect(part.probabilityEvaluated).toBeCloseTo(in90, 10);
		expect(part.fields.reduce((s, f) => s + f.cellProbability, 0)).toBeCloseTo(in90, 10);
		for (let k = 1; k < part.fields.length; k++) expect(part.fields[k - 1].probability).toBeGreaterThanOrEqual(part.fields[k].probability);
	});

	it('circle centred on a Fisher blob: enclosed probability vs the analytic cap (Fisher 1953) within the stated bound', () => {
		expect.hasAssertions();
		const fov: FieldOfView = { shape: 'circle', diameterDeg: 6 };
		const t = tileSky(fov);
		const centre = fieldAt(t, t.rowStart[Math.floor(t.rows.length / 2) + 3] + 5);
		const sigmaDeg = 2;
		const map = fisherMap(centre.raDeg, centre.decDeg, sigmaDeg);
		const r = rankFields(map, t, { level: 1 });
		const best = r.fields[0];
		expect(best.id).toBe(centre.id);
		const kappa = 1 / (sigmaDeg * (Math.PI / 180)) ** 2;
		const R = 3 * (Math.PI / 180);
		const analytic = -Math.expm1(-kappa * (1 - Math.cos(R))) / -Math.expm1(-2 * kappa);
		// The map itself is pixelised (density at pixel centres, renormalised): allow 0.5% for that,
		// plus the field's own pixelisation bound.
				expect(Math.abs(best.probability - analytic)).toBeLessThan(best.boundaryProbability + 0.005 * analytic);
		// The bound is conservative (measured: error 0.0015, bound 0.119 at evaluation order 8); the
		// actual agreement is far tighter than the bound.
		expect(Math.abs(best.probability - analytic)).toBeLessThan(0.005 * analytic);
		expect(best.boundaryProbability).toBeLessThan(0.25 * analytic);
	});

	it('rectangle: a finer evaluation order agrees within the pixelisation bound', () => {
		expect.hasAssertions();
		const map = fisherMap(201, 47, 3);
		const t = tileSky({ shape: 'rectangle', widthDeg: 3, heightDeg: 3 });
		const coarse = rankFields(map, t, { level: 0.99 });
		const fine = rankFields(map, t, { level: 0.99, evaluationOrder: coarse.evaluationOrder + 2 });
		const fineById = new Map(fine.fields.map((f) => [f.id, f.probability]));
		for (const f of coarse.fields.slice(0, 20)) {
			expect(Math.abs(f.probability - fineById.get(f.id)!)).toBeLessThanOrEqual(f.boundaryProbability + 1e-12);
		}
		expect(coarse.fields[0].probability).toBeGreaterThan(0.05);
	});
});
