import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { nearbyGalaxies, projectedSeparationKpc } from './hosts.ts';

// astropy SkyCoord.separation and d·θ with astropy units (make_hosts.py).
const reference = JSON.parse(readFileSync(new URL('../../../tests/fixtures/candidates/hosts.json', import.meta.url), 'utf8'));

describe('host galaxies near a candidate', () => {
	for (const c of reference.cases) {
		it(`separations and projected distances agree with astropy (${c.label})`, () => {
			expect.hasAssertions();
			const all = nearbyGalaxies(c, c.galaxies, 3600);
			expect(all.map((g) => g.id)).toEqual(
				[...c.expected].sort((a: { separationArcsec: number }, b: { separationArcsec: number }) => a.separationArcsec - b.separationArcsec).map((e: { id: string }) => e.id)
			);
			for (const e of c.expected) {
				const g = all.find((x) => x.id === e.id)!;
				expect(Math.abs(g.separationArcsec - e.separationArcsec)).toBeLessThan(1e-6);
				if (e.projectedKpc === null) expect(g.projectedKpc).toBeNull();
				else expect(g.projectedKpc!).toBeCloseTo(e.projectedKpc, 6);
			}
		});
	}

	it('keeps only galaxies inside the radius, nearest first', () => {
		expect.hasAssertions();
		const c = reference.cases[0];
		const near = nearbyGalaxies(c, c.galaxies, 60);
		expect(near.map((g) => g.id)).toEqual(['G001', 'G002', 'G003']);
		expect(near[0]).toMatchObject({ name: 'Invented 1', distanceMpc: c.galaxies[0].distanceMpc });
	});

	it('small-angle projection: 1 arcsec at 206.265 Mpc is 1 kpc', () => {
		expect.hasAssertions();
		expect(projectedSeparationKpc(1, 206.264806)).toBeCloseTo(1, 6);
	});

	it('refuses a bad position or radius in plain words', () => {
		expect.hasAssertions();
		expect(() => nearbyGalaxies({ raDeg: 10, decDeg: 95 }, [], 10)).toThrow('the candidate has an invalid position (RA 10°, Dec 95°)');
		expect(() => nearbyGalaxies({ raDeg: 10, decDeg: 5 }, [{ id: 'X', raDeg: Number.NaN, decDeg: 0 }], 10)).toThrow(/galaxy X has an invalid position/);
		expect(() => nearbyGalaxies({ raDeg: 10, decDeg: 5 }, [], 0)).toThrow(/search radius must be a positive number/);
	});
});
