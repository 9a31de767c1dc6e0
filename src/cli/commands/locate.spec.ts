import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import locate from './locate.ts';

const fixtures = new URL('../../../tests/fixtures/', import.meta.url);
const map = new URL('sky/moc_map.fits', fixtures).pathname;
/** scipy.integrate.quad of r² N(r; μ, σ) at healpy's pixel of each direction (tests/fixtures/candidates/make_vetting.py). */
const reference = JSON.parse(readFileSync(new URL('candidates/vetting.json', fixtures), 'utf8')) as {
	cases: { raDeg: number; decDeg: number; credibleLevel: number; hosts: { distanceMpc: number; cdf: number; pValue: number }[] }[];
};

describe('locate … --distance', () => {
	it('keeps its fields and adds distanceCdf and distancePValue = 2·min(cdf, 1 − cdf), as scipy integrates them', async () => {
		expect.hasAssertions();
		for (const c of reference.cases.filter((x) => x.hosts.length)) {
			for (const h of c.hosts) {
				const { json } = await locate.run([map], { ra: String(c.raDeg), dec: String(c.decDeg), distance: String(h.distanceMpc) });
				const out = json as Record<string, number>;
				expect(Object.keys(out)).toEqual(['credibleLevel', 'probabilityDensity', 'distanceMean', 'distanceStd', 'dPdV', 'distanceCdf', 'distancePValue']);
				expect(Math.abs(out.credibleLevel - c.credibleLevel)).toBeLessThan(1e-9);
				expect(Math.abs(out.distanceCdf - h.cdf)).toBeLessThan(1e-9);
				expect(out.distancePValue / h.pValue).toBeCloseTo(1, 7);
				expect(out.distancePValue).toBeCloseTo(2 * Math.min(out.distanceCdf, 1 - out.distanceCdf), 12);
			}
		}
	});
	it('without --distance gives neither; where the map has no distance both are null', async () => {
		expect.hasAssertions();
		const { json } = await locate.run([map], { ra: '150', dec: '-30' });
		expect(Object.keys(json as object)).toEqual(['credibleLevel', 'probabilityDensity', 'distanceMean', 'distanceStd']);
		// (165, −20) lies in a pixel without distance information (tests/fixtures/sky/expected.json).
		const none = (await locate.run([map], { ra: '165', dec: '-20', distance: '100' })).json as Record<string, unknown>;
		expect(none).toMatchObject({ distanceMean: null, dPdV: null, distanceCdf: null, distancePValue: null });
	});
});
