import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { readSkyMap } from '../sky/index.ts';
import { readPhotometryCsv } from './photometry.ts';
import { DEFAULT_KILONOVA_THRESHOLDS } from './rules.ts';
import { associateHost, HOST_MAX_PROJECTED_KPC, lookUpDirections, vetCandidate, type RankedGalaxy } from './vetting.ts';

const fixtures = new URL('../../../tests/fixtures/', import.meta.url);
/** healpy 1.16.1 pixel lookup, numpy credible levels, scipy quad for the distance tails (make_vetting.py; versions in the file). */
const reference = JSON.parse(readFileSync(new URL('candidates/vetting.json', fixtures), 'utf8')) as {
	cases: {
		label: string;
		raDeg: number;
		decDeg: number;
		credibleLevel: number;
		probabilityDensity: number;
		distMu: number | null;
		distSigma: number | null;
		distanceMeanMpc?: number;
		distanceStdMpc?: number;
		hosts: { distanceMpc: number; cdf: number; sf: number; pValue: number }[];
	}[];
};
const bytes = readFileSync(new URL('sky/moc_map.fits', fixtures));
const map = readSkyMap(new Uint8Array(bytes.buffer, bytes.byteOffset, bytes.byteLength));

describe('sky-map lookup of candidate directions', () => {
	it('gives the credible level, density and distance ansatz healpy and numpy give, for all directions in one pass', () => {
		expect.hasAssertions();
		const got = lookUpDirections(map, reference.cases);
		reference.cases.forEach((c, k) => {
			expect(Math.abs(got[k].credibleLevel - c.credibleLevel), c.label).toBeLessThan(1e-9);
			expect(got[k].probabilityDensity / c.probabilityDensity, c.label).toBeCloseTo(1, 9);
			if (c.distMu === null) expect(got[k].distMu, c.label).toBeNull();
			else {
				expect(got[k].distMu).toBeCloseTo(c.distMu, 9);
				expect(got[k].distSigma).toBeCloseTo(c.distSigma!, 9);
				expect(got[k].distanceMeanMpc! / c.distanceMeanMpc!).toBeCloseTo(1, 8);
				expect(got[k].distanceStdMpc! / c.distanceStdMpc!).toBeCloseTo(1, 8);
			}
		});
	});
});

describe('host association', () => {
	it('takes the nearest galaxy in projection and compares its distance with the posterior as scipy integrates it', () => {
		expect.hasAssertions();
		for (const c of reference.cases.filter((x) => x.hosts.length > 0)) {
			const sky = lookUpDirections(map, [c])[0];
			for (const h of c.hosts) {
				// A galaxy 20″ north of the candidate at the reference distance, and a farther one in projection.
				const galaxies: RankedGalaxy[] = [
					{ id: 'near', name: 'Test galaxy A', raDeg: c.raDeg, decDeg: c.decDeg + 20 / 3600, distanceMpc: h.distanceMpc, rank: 3, probability: 0.01 },
					{ id: 'far', name: 'Test galaxy B', raDeg: c.raDeg, decDeg: c.decDeg - 200 / 3600, distanceMpc: h.distanceMpc }
				];
				const a = associateHost(c, galaxies, sky);
				expect(a.host?.galaxy.id).toBe('near');
				expect(a.host?.galaxy.rank).toBe(3);
				expect(Math.abs(a.host!.distanceCdf! - h.cdf), `${c.label} at ${h.distanceMpc} Mpc`).toBeLessThan(1e-9);
				expect(a.host!.distancePValue! / h.pValue, `${c.label} at ${h.distanceMpc} Mpc`).toBeCloseTo(1, 7);
				expect(a.nearby.map((g) => g.id)).toEqual(['near', 'far']);
			}
		}
	});
	it('says why there is no host: nothing ranked, nothing near, or nothing close enough in projection', () => {
		expect.hasAssertions();
		const at = { raDeg: 150, decDeg: -30 };
		expect(associateHost(at, [], null).note).toMatch(/No ranked galaxies/);
		expect(associateHost(at, [{ id: 'x', raDeg: 170, decDeg: -30, distanceMpc: 100 }], null).note).toMatch(/No ranked galaxy within 10′/);
		// 500″ at 100 Mpc ≈ 242 kpc, beyond the projected limit.
		const wide = associateHost(at, [{ id: 'x', raDeg: 150, decDeg: -30 + 500 / 3600, distanceMpc: 100 }], null);
		expect(wide.host).toBeNull();
		expect(wide.note).toContain(`none within ${HOST_MAX_PROJECTED_KPC} kpc`);
	});
});

describe('vetting a candidate', () => {
	const photometry = readPhotometryCsv(readFileSync(new URL('candidates/lightcurve-kilonova-like.csv', fixtures), 'utf8'));
	const mergerTimeMs = Date.parse(JSON.parse(readFileSync(new URL('candidates/lightcurves.json', fixtures), 'utf8')).mergerTime);
	it('a fast-fading, reddening source in the region with a host at a consistent distance is kilonova-like', () => {
		expect.hasAssertions();
		const c = reference.cases[0];
		const sky = lookUpDirections(map, [c])[0];
		// The fixture light curve is that of a source at 40 Mpc: moved to 160 Mpc, 5·log10(4) ≈ 3.01 mag fainter.
		const shifted = photometry.map((p) => ({ ...p, mag: p.mag === null ? null : p.mag + 3.01, limitMag: p.limitMag === null ? null : p.limitMag + 3.01 }));
		const v = vetCandidate({
			candidate: { raDeg: c.raDeg, decDeg: c.decDeg, discoveredAtMs: mergerTimeMs + 10 * 3_600_000 },
			mergerTimeMs,
			sky,
			galaxies: [{ id: 'g1', name: 'Test galaxy A', raDeg: c.raDeg + 5 / 3600, decDeg: c.decDeg, distanceMpc: 160, distanceErrMpc: 16 }],
			photometry: shifted,
			thresholds: DEFAULT_KILONOVA_THRESHOLDS,
			nowMs: mergerTimeMs + 5 * 86_400_000
		});
		expect(v.rules.verdict).toBe('kilonova-like');
		expect(v.timing.discoveryAfterMergerHours).toBeCloseTo(10, 12);
		expect(v.absoluteMagnitude?.distanceFrom).toBe('host');
		expect(v.hosts.host?.distancePValue! / c.hosts[0].pValue).toBeCloseTo(1, 7);
		expect(v.lightCurve.colour?.blue).toBe('g');
		expect(Object.keys(v.lightCurve.filters).sort()).toEqual(['g', 'i', 'r']);
	});
	it('without a map or photometry the rules stay undecided and say what is missing', () => {
		expect.hasAssertions();
		const v = vetCandidate({
			candidate: { raDeg: 10, decDeg: 10, discoveredAtMs: mergerTimeMs },
			mergerTimeMs: null,
			sky: null,
			galaxies: [],
			photometry: [],
			thresholds: DEFAULT_KILONOVA_THRESHOLDS,
			nowMs: mergerTimeMs
		});
		expect(v.rules.verdict).toBe('undecided');
		expect(v.absoluteMagnitude).toBeNull();
		expect(v.timing.discoveryAfterMergerHours).toBeNull();
		expect(v.rules.reasons.join(' ')).toMatch(/credible level in the sky map is not known/);
	});
});
