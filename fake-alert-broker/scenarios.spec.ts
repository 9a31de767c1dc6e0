import { mkdtempSync, readdirSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gunzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { farHzToPerYear, parseVoevent } from '../src/lib/alerts/voevent.ts';
import { parseJsonNotice } from '../src/lib/alerts/notice-json.ts';
import { antisolarRaDeg, listScenarios, loadScenario, renderScenario, rotateSky, writeScenario } from './scenarios.ts';
import { readSkyMap, summarise } from '../src/lib/sky/index.ts';
import { nightWindow, observableWindow } from '../src/lib/targeting/night.ts';
import { sunSeparationDeg } from '../src/lib/targeting/sun-moon.ts';
import { angularSeparationDeg } from '../src/lib/targeting/sky-geometry.ts';
import { DEMO_TELESCOPES } from '../seeds/scenario.ts';

const epoch = new Date('2030-04-12T07:31:00.000Z');
const httpBase = 'http://127.0.0.1:8098';

describe('scenarios', () => {
	it('has the five stories, each loading and rendering into notices that parse (except the malformed one)', () => {
		expect(listScenarios()).toEqual(['bbh', 'bns', 'malformed', 'retraction', 'test']);
		for (const name of listScenarios()) {
			const steps = renderScenario(loadScenario(name), { epoch, httpBase, seed: 1 });
			for (const s of steps) {
				if (name === 'malformed') {
					expect(() => parseVoevent(s.xml)).toThrow(/malformed XML/);
					continue;
				}
				const n = parseVoevent(s.xml);
				expect(n.ivorn).toBe(s.ivorn);
				expect(n.sourceEventId).toMatch(/^SX/);
				expect(n.skymapUrl === null).toBe(s.map === null);
			}
		}
	});

	it('renders every scenario as JSON notices too: the same content as the VOEvent, the map inside, test events with the mock prefix', () => {
		expect.hasAssertions();
		for (const name of listScenarios()) {
			for (const s of renderScenario(loadScenario(name), { epoch, httpBase, seed: 1 })) {
				if (name === 'malformed') {
					expect(() => parseJsonNotice(s.json())).toThrow(/not valid JSON/);
					continue;
				}
				const fromXml = parseVoevent(s.xml);
				const { notice, embeddedSkymap } = parseJsonNotice(s.json());
				expect(notice).toMatchObject({
					kind: fromXml.kind,
					role: fromXml.role,
					sourceEventId: fromXml.role === 'observation' ? fromXml.sourceEventId : `M${fromXml.sourceEventId}`,
					authoredAt: fromXml.authoredAt,
					eventTime: fromXml.eventTime,
					classification: fromXml.classification,
					properties: fromXml.properties
				});
				if (fromXml.far === null) expect(notice.far).toBeNull();
				else expect(notice.far! / fromXml.far).toBeCloseTo(1, 12);
				if (s.map) expect(Buffer.from(embeddedSkymap!).equals(s.map.build())).toBe(true);
				else expect(embeddedSkymap).toBeNull();
			}
		}
	});

	it('tells the neutron-star merger as preliminary → initial → update with sharper maps and a new distance', () => {
		const steps = renderScenario(loadScenario('bns'), { epoch, httpBase, seed: 1 });
		const notices = steps.map((s) => parseVoevent(s.xml));
		expect(notices.map((n) => n.kind)).toEqual(['preliminary', 'initial', 'update']);
		expect(notices[1].citations[0]).toEqual({ ivorn: notices[0].ivorn, cite: 'supersedes' });
		expect(farHzToPerYear(notices[2].far!)).toBeCloseTo(0.0004, 10);
		const sizes = steps.map((s) => gunzipSync(s.map!.build()).length);
		expect(sizes.every((b) => b % 2880 === 0)).toBe(true);
		// Who/Date follows the delays: 0 s, 25 s, 85 s after the epoch at speed 1.
		expect(notices.map((n) => (Date.parse(n.authoredAt) - epoch.getTime()) / 1000)).toEqual([0, 25, 85]);
		// The same event time in every notice.
		expect(new Set(notices.map((n) => n.eventTime)).size).toBe(1);
	});

	it('retracts, marks the test notice, and classifies the black-hole merger as BBH', () => {
		const r = renderScenario(loadScenario('retraction'), { epoch, httpBase }).map((s) => parseVoevent(s.xml));
		expect(r[1]).toMatchObject({ kind: 'retraction', classification: null, skymapUrl: null });
		expect(r[1].citations).toEqual([{ ivorn: r[0].ivorn, cite: 'retraction' }]);
		const t = parseVoevent(renderScenario(loadScenario('test'), { epoch, httpBase })[0].xml);
		expect(t.role).toBe('test');
		const bbh = parseVoevent(renderScenario(loadScenario('bbh'), { epoch, httpBase })[0].xml);
		expect(bbh.classification!.BBH).toBeGreaterThan(0.98);
		expect(bbh.properties!.HasNS).toBe(0);
	});

	it('is deterministic for a seed, differs across seeds, and renames events per loop cycle', () => {
		const sc = loadScenario('bns');
		const a = renderScenario(sc, { epoch, httpBase, seed: 5 });
		const b = renderScenario(sc, { epoch, httpBase, seed: 5 });
		const c = renderScenario(sc, { epoch, httpBase, seed: 6 });
		expect(a.map((s) => s.xml)).toEqual(b.map((s) => s.xml));
		expect(a[0].map!.build().equals(b[0].map!.build())).toBe(true);
		expect(gunzipSync(a[0].map!.build()).equals(gunzipSync(c[0].map!.build()))).toBe(false);
		const loop = renderScenario(sc, { epoch, httpBase, seed: 5, cycle: 2 });
		expect(loop[0].sourceEventId).toBe('SX30041207R2');
		expect(loop[0].ivorn).not.toBe(a[0].ivorn);
	});

	it('scales Who/Date with the speed factor', () => {
		const fast = renderScenario(loadScenario('bns'), { epoch, httpBase, speed: 5 }).map((s) => parseVoevent(s.xml));
		expect((Date.parse(fast[2].authoredAt) - epoch.getTime()) / 1000).toBe(17);
	});

	it('writes a scenario to a folder', () => {
		const dir = mkdtempSync(join(tmpdir(), 'strainline-scenario-'));
		try {
			const files = writeScenario('retraction', dir, { epoch, httpBase });
			expect(files).toHaveLength(3);
			expect(readdirSync(dir).sort()).toEqual([
				'01-SX30041315-1-preliminary.xml',
				'02-SX30041315-2-retraction.xml',
				'SX30041315-1.multiorder.fits.gz'
			]);
		} finally {
			rmSync(dir, { recursive: true, force: true });
		}
	});

	it('refuses an unknown scenario with the list of known ones', () => {
		expect(() => loadScenario('nope')).toThrow(/no scenario "nope" \(have: bbh, bns/);
		expect(() => loadScenario('../etc')).toThrow(/bad scenario name/);
	});

	it('turns a scenario\'s sky rigidly: the anchor lands where asked and separations are kept', () => {
		expect.hasAssertions();
		const from = { raDeg: 197.9, decDeg: -23.3 };
		const to = { raDeg: 12.5, decDeg: -10 };
		const anchor = rotateSky(from, from, to);
		expect(angularSeparationDeg(anchor, to)).toBeLessThan(1e-9);
		const lobe = { raDeg: 232, decDeg: -45 };
		expect(angularSeparationDeg(rotateSky(lobe, from, to), anchor)).toBeCloseTo(angularSeparationDeg(lobe, from), 9);
	});
});

/** Observable by the telescope (above its altitude and airmass limits, in astronomical darkness) within 24 h of `time`. */
function observableWithinADay(t: (typeof DEMO_TELESCOPES)[number], target: { raDeg: number; decDeg: number }, time: Date): boolean {
	const site = { latitudeDeg: t.latitudeDeg, longitudeDeg: t.longitudeDeg, elevationM: t.elevationM };
	const minAltitudeDeg = Math.max(t.minAltitudeDeg, (Math.asin(1 / t.maxAirmass) * 180) / Math.PI);
	const start = time.getTime();
	// The night in progress and the next one, by local mean solar date (as the targets page picks "tonight").
	return [-12, 12].some((hours) => {
		const date = new Date(start + (t.longitudeDeg / 15 + hours) * 3_600_000).toISOString().slice(0, 10);
		const win = observableWindow(site, target, nightWindow(site, date), minAltitudeDeg);
		return win.intervals.some((i) => Date.parse(i.end) > start && Date.parse(i.start) < start + 24 * 3_600_000);
	});
}

describe('the demo sky is a night sky whenever it is played', () => {
	// Twelve play times through a year, at different hours of the day.
	const times = Array.from({ length: 12 }, (_, k) => new Date(Date.UTC(2027, k, 3 + 2 * k, (5 * k) % 24, 17)));

	it.each(times.map((t) => [t.toISOString(), t] as const))('played at %s: every map peak of the neutron-star story is > 90° from the Sun and observable from ≥ 3 seeded telescopes', (_, epoch) => {
		expect.hasAssertions();
		const steps = renderScenario(loadScenario('bns'), { epoch, httpBase, seed: 1 });
		for (const step of steps) {
			const peak = summarise(readSkyMap(new Uint8Array(step.map!.build()))).peak;
			const target = { raDeg: peak.ra, decDeg: peak.dec };
			const sunDeg = sunSeparationDeg(target, epoch);
			expect(sunDeg, `${step.kind} peak ${peak.ra.toFixed(1)}, ${peak.dec.toFixed(1)}`).toBeGreaterThan(90);
			// Within ±20° of the equator, so that sites of both hemispheres reach it.
			expect(Math.abs(peak.dec)).toBeLessThan(20);
			const observers = DEMO_TELESCOPES.filter((t) => observableWithinADay(t, target, epoch)).map((t) => t.name);
			expect(observers.length, `${step.kind}: ${observers.join(', ')}`).toBeGreaterThanOrEqual(3);
			// Sites on both sides of the equator among them.
			const lat = DEMO_TELESCOPES.filter((t) => observers.includes(t.name)).map((t) => t.latitudeDeg);
			expect(lat.some((x) => x > 0) && lat.some((x) => x < 0)).toBe(true);
		}
		// The antisolar point the placement aims at is where night.ts says the Sun is not.
		expect(sunSeparationDeg({ raDeg: antisolarRaDeg(epoch), decDeg: 0 }, epoch)).toBeGreaterThan(155);
	}, 30_000);

	it('places the other stories with maps opposite the Sun as well, apart from each other', () => {
		expect.hasAssertions();
		const epoch = times[6];
		const peaks = ['bbh', 'retraction', 'test'].map((name) => {
			const step = renderScenario(loadScenario(name), { epoch, httpBase, seed: 1 }).find((s) => s.map)!;
			const p = summarise(readSkyMap(new Uint8Array(step.map!.build()))).peak;
			return { raDeg: p.ra, decDeg: p.dec };
		});
		for (const p of peaks) expect(sunSeparationDeg(p, epoch)).toBeGreaterThan(90);
		expect(angularSeparationDeg(peaks[0], peaks[1])).toBeGreaterThan(30);
	}, 30_000);
});

