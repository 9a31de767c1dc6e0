import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
	aberrate,
	altitudeFromZenithDeg,
	altitudesNow,
	angleBetweenDeg,
	apparentSkyAt,
	ephemerisTables,
	instantAt,
	localSiderealTimeHours,
	siteEphemeris,
	targetAltAz,
	TABLE_STEP_MS
} from './apparent-place.ts';
import type { Site } from './observing-inputs.ts';
import { unitVector } from './sky-geometry.ts';
import { sunSeparationDeg } from './sun-moon.ts';

// Reference: astropy 5.2.1 / astroplan 0.7 (Debian 12), tests/fixtures/night/fixtures.json made by
// tests/fixtures/night/make_fixtures.py (README.md beside it gives the conventions): geometric
// altitude from AltAz(pressure=0), target–Sun separation in GCRS, target–Moon separation in the
// topocentric AltAz frame, local apparent sidereal time with UT1 = UTC. The fixture's README puts
// the effect of its frozen Earth-orientation table on altitudes below 0.005°, hence that bound.
interface FixSample {
	target: string;
	ra: number;
	dec: number;
	time: string;
	altitude: number;
	moonSeparation: number;
	sunSeparation: number;
}
interface FixNight {
	site: { name: string; latitude: number; longitude: number; elevation: number };
	date: string;
	samples: FixSample[];
	sidereal: { time: string; longitude: number; lastHours: number }[];
}
const fixtures = JSON.parse(readFileSync(new URL('../../../tests/fixtures/night/fixtures.json', import.meta.url), 'utf8')) as { nights: FixNight[] };

const siteOf = (n: FixNight): Site => ({ latitudeDeg: n.site.latitude, longitudeDeg: n.site.longitude, elevationM: n.site.elevation });
/** Difference of two angles in degrees on a circle of `turn`. */
const circularDiff = (a: number, b: number, turn: number) => Math.abs(((((a - b) % turn) + 1.5 * turn) % turn) - turn / 2);

interface Forms {
	scalar: number;
	vectorised: number;
	tabulated: number;
	reference: number;
}

/** Every fixture sample through the three forms; values grouped by quantity. */
function evaluate(): { altitude: Forms[]; sunSeparation: Forms[]; moonSeparation: { tabulated: number; reference: number }[]; lastHours: Forms[] } {
	const altitude: Forms[] = [];
	const sunSeparation: Forms[] = [];
	const moonSeparation: { tabulated: number; reference: number }[] = [];
	const lastHours: Forms[] = [];
	for (const n of fixtures.nights) {
		const site = siteOf(n);
		const times = [...new Set(n.samples.map((s) => s.time))].map((t) => Date.parse(t));
		// One table per night, as the plan builds one per plan; sample times fall between nodes.
		const tables = ephemerisTables(Math.min(...times) - TABLE_STEP_MS / 3, Math.max(...times));
		const here = siteEphemeris(tables, site);
		for (const ms of times) {
			const now = new Date(ms);
			const samples = n.samples.filter((s) => Date.parse(s.time) === ms);
			const sky = apparentSkyAt(site, now);
			const fast = altitudesNow(sky, Float64Array.from(samples, (s) => s.ra), Float64Array.from(samples, (s) => s.dec));
			const at = instantAt(tables, here, ms);
			samples.forEach((s, k) => {
				const target = { raDeg: s.ra, decDeg: s.dec };
				const apparent = aberrate(unitVector(s.ra, s.dec), at.beta);
				altitude.push({
					scalar: targetAltAz(site, target, now).geometricAltitudeDeg,
					vectorised: fast.altitudeDeg[k],
					tabulated: altitudeFromZenithDeg(apparent, at.zenith),
					reference: s.altitude
				});
				sunSeparation.push({
					scalar: sunSeparationDeg(target, now),
					vectorised: fast.sunSeparationDeg[k],
					tabulated: angleBetweenDeg(apparent, at.sunGeo),
					reference: s.sunSeparation
				});
				moonSeparation.push({ tabulated: angleBetweenDeg(apparent, at.moonTopo), reference: s.moonSeparation });
			});
			const ref = n.sidereal.find((x) => Math.abs(Date.parse(`${x.time}Z`) - ms) < 1);
			if (ref) {
				const x = (ms - tables.t0) / TABLE_STEP_MS;
				const k = Math.floor(x);
				const gastDeg = tables.gastDeg[k] + (tables.gastDeg[k + 1] - tables.gastDeg[k]) * (x - k);
				lastHours.push({
					scalar: localSiderealTimeHours(now, site.longitudeDeg, 'apparent'),
					vectorised: sky.lastDeg / 15,
					tabulated: (gastDeg + site.longitudeDeg) / 15,
					reference: ref.lastHours
				});
			}
		}
	}
	return { altitude, sunSeparation, moonSeparation, lastHours };
}

const results = evaluate();

function worst(list: Forms[], diff: (a: number, b: number) => number = (a, b) => Math.abs(a - b)) {
	const w = { scalarVectorised: 0, scalarTabulated: 0, vectorisedTabulated: 0, scalar: 0, vectorised: 0, tabulated: 0 };
	for (const f of list) {
		w.scalarVectorised = Math.max(w.scalarVectorised, diff(f.scalar, f.vectorised));
		w.scalarTabulated = Math.max(w.scalarTabulated, diff(f.scalar, f.tabulated));
		w.vectorisedTabulated = Math.max(w.vectorisedTabulated, diff(f.vectorised, f.tabulated));
		w.scalar = Math.max(w.scalar, diff(f.scalar, f.reference));
		w.vectorised = Math.max(w.vectorised, diff(f.vectorised, f.reference));
		w.tabulated = Math.max(w.tabulated, diff(f.tabulated, f.reference));
	}
	return w;
}

describe('the three forms of the apparent place (scalar, vectorised, tabulated) vs each other and astropy 5.2.1', () => {
	it(`covers every fixture sample (${results.altitude.length} target-instants, ${results.lastHours.length} sidereal times)`, () => {
		expect.hasAssertions();
		expect(results.altitude.length).toBe(fixtures.nights.reduce((s, n) => s + n.samples.length, 0));
		expect(results.altitude.length).toBeGreaterThan(1000);
		expect(results.lastHours.length).toBeGreaterThan(50);
	});

	it('geometric altitude: the forms agree to 1e-6°, each within 0.005° of astropy AltAz(pressure = 0)', () => {
		expect.hasAssertions();
		const w = worst(results.altitude);
		console.info(`altitude: forms ${w.scalarVectorised.toExponential(1)}° / ${w.scalarTabulated.toExponential(1)}° / ${w.vectorisedTabulated.toExponential(1)}°; vs astropy ${w.scalar.toFixed(4)}° / ${w.vectorised.toFixed(4)}° / ${w.tabulated.toFixed(4)}°`);
		expect(w.scalarVectorised).toBeLessThan(1e-6);
		expect(w.scalarTabulated).toBeLessThan(1e-6);
		expect(w.vectorisedTabulated).toBeLessThan(1e-6);
		expect(w.scalar).toBeLessThan(0.005);
		expect(w.vectorised).toBeLessThan(0.005);
		expect(w.tabulated).toBeLessThan(0.005);
	});

	it('geocentric solar elongation: the forms agree to 1e-6°, each within 0.005° of astropy (GCRS)', () => {
		expect.hasAssertions();
		const w = worst(results.sunSeparation);
		console.info(`Sun separation: forms ${w.scalarVectorised.toExponential(1)}° / ${w.scalarTabulated.toExponential(1)}° / ${w.vectorisedTabulated.toExponential(1)}°; vs astropy ${w.scalar.toFixed(4)}°`);
		expect(w.scalarVectorised).toBeLessThan(1e-6);
		expect(w.scalarTabulated).toBeLessThan(1e-6);
		expect(w.vectorisedTabulated).toBeLessThan(1e-6);
		expect(w.scalar).toBeLessThan(0.005);
		expect(w.vectorised).toBeLessThan(0.005);
		expect(w.tabulated).toBeLessThan(0.005);
	});

	it('topocentric Moon separation from the tables within 0.01° of astropy', () => {
		expect.hasAssertions();
		const worstMoon = Math.max(...results.moonSeparation.map((m) => Math.abs(m.tabulated - m.reference)));
		console.info(`Moon separation (tabulated) vs astropy: ${worstMoon.toFixed(4)}°`);
		expect(worstMoon).toBeLessThan(0.01);
	});

	it('local apparent sidereal time: the forms agree to 1 ms of time, each within 20 ms of astropy (UT1 = UTC)', () => {
		expect.hasAssertions();
		const seconds = (a: number, b: number) => circularDiff(a, b, 24) * 3600;
		const w = worst(results.lastHours, seconds);
		console.info(`LAST: forms ${w.scalarVectorised.toExponential(1)} s / ${w.scalarTabulated.toExponential(1)} s; vs astropy ${w.scalar.toFixed(4)} s / ${w.tabulated.toFixed(4)} s`);
		expect(w.scalarVectorised).toBeLessThan(0.001);
		expect(w.scalarTabulated).toBeLessThan(0.001);
		expect(w.vectorisedTabulated).toBeLessThan(0.001);
		expect(w.scalar).toBeLessThan(0.02);
		expect(w.vectorised).toBeLessThan(0.02);
		expect(w.tabulated).toBeLessThan(0.02);
	});

	it('leaving out aberration moves the vectorised altitude by more than the forms disagree (the comparison can fail)', () => {
		expect.hasAssertions();
		const n = fixtures.nights[0];
		const s = n.samples.find((x) => x.altitude > 20)!;
		const now = new Date(s.time);
		const sky = apparentSkyAt(siteOf(n), now);
		const with_ = altitudesNow(sky, Float64Array.of(s.ra), Float64Array.of(s.dec)).altitudeDeg[0];
		const without = altitudesNow({ ...sky, beta: [0, 0, 0] }, Float64Array.of(s.ra), Float64Array.of(s.dec)).altitudeDeg[0];
		// Annual aberration is up to 20.5″ (5.7e-3°); its altitude component here is well above 1e-6°.
		expect(Math.abs(with_ - without)).toBeGreaterThan(1e-4);
		expect(Math.abs(with_ - without)).toBeLessThan(0.006);
	});
});
