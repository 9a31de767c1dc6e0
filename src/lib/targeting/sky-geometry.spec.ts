import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { mulberry32 } from '../../../fake-alert-broker/prng.ts';
import { fieldAt, inFootprint, tileSky, type FieldOfView } from './fields.ts';
import {
	angularSeparationDeg,
	containsVector,
	DISC_INSIDE,
	DISC_OUTSIDE,
	discRelation,
	equatorialToGalactic,
	footprintContains,
	footprintGeometry,
	footprintPolygon,
	galacticPlane,
	galacticToEquatorial,
	smallCircle,
	unitVector,
	type FootprintSpec,
	type Vec3
} from './sky-geometry.ts';

const DEG = Math.PI / 180;
const galactic: {
	plane: { l: number; ra: number; dec: number }[];
	points: { l: number; b: number; ra: number; dec: number }[];
	northGalacticPole: { ra: number; dec: number };
} = JSON.parse(readFileSync('tests/fixtures/coverage/reference.json', 'utf8')).galactic;

const sep = (ra1: number, dec1: number, ra2: number, dec2: number) => angularSeparationDeg({ raDeg: ra1, decDeg: dec1 }, { raDeg: ra2, decDeg: dec2 });

/** A direction at distance ρ and position angle θ from a centre (spherical trigonometry, Smart 1977 ch. II). */
function offset(ra: number, dec: number, rhoDeg: number, paDeg: number): [number, number] {
	const d = dec * DEG;
	const r = rhoDeg * DEG;
	const pa = paDeg * DEG;
	const sinDec = Math.sin(d) * Math.cos(r) + Math.cos(d) * Math.sin(r) * Math.cos(pa);
	const dec2 = Math.asin(Math.max(-1, Math.min(1, sinDec)));
	const dRa = Math.atan2(Math.sin(pa) * Math.sin(r) * Math.cos(d), Math.cos(r) - Math.sin(d) * sinDec);
	return [(((ra + dRa / DEG) % 360) + 360) % 360, dec2 / DEG];
}

describe('Galactic plane and coordinates (vs astropy 5.2.1, tests/fixtures/coverage/reference.json)', () => {
	it('points on b = 0 match astropy Galactic → ICRS to 0.01°', () => {
		expect.hasAssertions();
		for (const p of galactic.plane) {
			const q = galacticToEquatorial(p.l, 0);
			expect(sep(q.raDeg, q.decDeg, p.ra, p.dec)).toBeLessThan(0.01);
		}
		// galacticPlane(5) yields the same longitudes as the fixture, from l = 0.
		const line = galacticPlane(5);
		expect(line).toHaveLength(galactic.plane.length);
		line.forEach(([ra, dec], k) => expect(sep(ra, dec, galactic.plane[k].ra, galactic.plane[k].dec)).toBeLessThan(0.01));
	});

	it('random (l, b) and the north Galactic pole match astropy; the inverse returns (l, b)', () => {
		expect.hasAssertions();
		for (const p of galactic.points) {
			const q = galacticToEquatorial(p.l, p.b);
			expect(sep(q.raDeg, q.decDeg, p.ra, p.dec)).toBeLessThan(0.01);
			const back = equatorialToGalactic(p.ra, p.dec);
			expect(sep(back.lDeg, back.bDeg, p.l, p.b)).toBeLessThan(0.01);
		}
		const pole = galacticToEquatorial(0, 90);
		expect(sep(pole.raDeg, pole.decDeg, galactic.northGalacticPole.ra, galactic.northGalacticPole.dec)).toBeLessThan(1e-4);
		// The north celestial pole sits at l = 122.93192° (the defining angle).
		const ncp = equatorialToGalactic(0, 90);
		expect(ncp.lDeg).toBeCloseTo(122.93192, 4);
		expect(ncp.bDeg).toBeCloseTo(27.12825, 4);
	});
});

describe('smallCircle', () => {
	it('every vertex lies at the radius from the centre (Vincenty separation from night.ts), including round a pole and RA 0', () => {
		expect.hasAssertions();
		for (const [ra, dec, r] of [
			[10, 20, 45],
			[0.5, -3, 12],
			[200, 88, 5],
			[300, -75, 30]
		]) {
			const ring = smallCircle(ra, dec, r, 90);
			expect(ring).toHaveLength(90);
			for (const [a, d] of ring) expect(sep(ra, dec, a, d)).toBeCloseTo(r, 9);
		}
	});
});

describe('footprints', () => {
	const FOVS: FieldOfView[] = [
		{ shape: 'rectangle', widthDeg: 3, heightDeg: 2 },
		{ shape: 'rectangle', widthDeg: 7, heightDeg: 7 },
		{ shape: 'circle', diameterDeg: 4 }
	];

	it('containment agrees with fields.ts inFootprint on sampled points round tiling fields (equator, pole, RA 0)', () => {
		expect.hasAssertions();
		const random = mulberry32(99);
		let inside = 0;
		let checked = 0;
		for (const fov of FOVS) {
			const t = tileSky(fov);
			const picks = [0, 1, Math.floor(t.fieldCount / 2), t.fieldCount - 1, t.rowStart[Math.floor(t.rows.length / 2)]];
			for (const f of picks) {
				const field = fieldAt(t, f);
				const spec: FootprintSpec = { raDeg: field.raDeg, decDeg: field.decDeg, ...fov };
				const g = footprintGeometry(spec);
				expect(footprintContains(g, field.raDeg, field.decDeg)).toBe(true);
				for (let k = 0; k < 3000; k++) {
					const [ra, dec] = offset(field.raDeg, field.decDeg, 6 * Math.sqrt(random()), 360 * random());
					const mine = footprintContains(g, ra, dec);
					expect(mine).toBe(inFootprint(t, f, ra, dec));
					inside += mine ? 1 : 0;
					checked++;
				}
			}
		}
		// Enough points on both sides for the agreement to mean something.
		expect(inside).toBeGreaterThan(0.1 * checked);
		expect(inside).toBeLessThan(0.9 * checked);
	});

	it('rectangle outline: vertices on the edge in standard coordinates (Calabretta & Greisen 2002 TAN), centre inside', () => {
		expect.hasAssertions();
		for (const spec of [
			{ raDeg: 359.2, decDeg: 1, shape: 'rectangle', widthDeg: 4, heightDeg: 2 },
			{ raDeg: 80, decDeg: 86, shape: 'rectangle', widthDeg: 6, heightDeg: 6 },
			{ raDeg: 150, decDeg: -30, shape: 'rectangle', widthDeg: 1, heightDeg: 3 }
		] as FootprintSpec[]) {
			if (spec.shape !== 'rectangle') continue;
			const poly = footprintPolygon(spec, 6);
			expect(poly).toHaveLength(24);
			const tw = Math.tan((spec.widthDeg / 2) * DEG);
			const th = Math.tan((spec.heightDeg / 2) * DEG);
			for (const [ra, dec] of poly) {
				const da = (ra - spec.raDeg) * DEG;
				const d = dec * DEG;
				const d0 = spec.decDeg * DEG;
				const D = Math.sin(d) * Math.sin(d0) + Math.cos(d) * Math.cos(d0) * Math.cos(da);
				const xi = (Math.cos(d) * Math.sin(da)) / D;
				const eta = (Math.sin(d) * Math.cos(d0) - Math.cos(d) * Math.sin(d0) * Math.cos(da)) / D;
				expect(Math.max(Math.abs(xi) / tw, Math.abs(eta) / th)).toBeCloseTo(1, 9);
			}
			expect(footprintContains(footprintGeometry(spec), spec.raDeg, spec.decDeg)).toBe(true);
		}
	});

	it('circle outline is the cap edge; the cap contains its centre and not a point just outside', () => {
		expect.hasAssertions();
		const spec: FootprintSpec = { raDeg: 0.3, decDeg: -45, shape: 'circle', diameterDeg: 5 };
		const g = footprintGeometry(spec);
		for (const [ra, dec] of footprintPolygon(spec)) expect(sep(ra, dec, 0.3, -45)).toBeCloseTo(2.5, 9);
		expect(footprintContains(g, 0.3, -45)).toBe(true);
		expect(footprintContains(g, ...offset(0.3, -45, 2.49, 250))).toBe(true);
		expect(footprintContains(g, ...offset(0.3, -45, 2.51, 250))).toBe(false);
	});

	it('discRelation: "inside" and "outside" are never wrong on sampled points of the disc', () => {
		expect.hasAssertions();
		const random = mulberry32(5);
		const specs: FootprintSpec[] = [
			{ raDeg: 10, decDeg: 10, shape: 'rectangle', widthDeg: 5, heightDeg: 3 },
			{ raDeg: 10, decDeg: 89, shape: 'rectangle', widthDeg: 8, heightDeg: 8 },
			{ raDeg: 10, decDeg: 10, shape: 'circle', diameterDeg: 6 }
		];
		const seen = new Set<number>();
		for (const spec of specs) {
			const g = footprintGeometry(spec);
			for (let k = 0; k < 400; k++) {
				const [ra, dec] = offset(spec.raDeg, spec.decDeg, 8 * random(), 360 * random());
				const r = 0.2 + 1.5 * random();
				const rel = discRelation(g, unitVector(ra, dec), r * DEG);
				seen.add(rel);
				if (rel === DISC_INSIDE || rel === DISC_OUTSIDE) {
					for (let s = 0; s < 40; s++) {
						const q = offset(ra, dec, r * Math.sqrt(random()), 360 * random());
						expect(containsVector(g, unitVector(...q) as Vec3)).toBe(rel === DISC_INSIDE);
					}
				}
			}
		}
		expect(seen.size).toBe(3);
	});
});
