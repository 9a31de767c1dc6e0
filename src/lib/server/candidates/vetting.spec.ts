import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, afterEach, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { useStorageRoot } from '../platform/storage';
import { receivedMail, stopFakeSmtp, type ReceivedMail } from '../platform/fake-smtp';
import { record, SYSTEM } from '../platform/realtime';
import { config } from '../platform/config';
import { addPhotometryCsv, addPhotometryRows } from './photometry';
import { clearVettingCache, currentThresholds, installVetting, setThresholds, vetEvent, vettingIdle, vettingOf } from './vetting';
import { fixture, giveGalaxies, giveMap, kilonovaCsv, NOW, person, world, type World } from './testing';

/** healpy 1.16.1 / numpy / scipy references for the same map and direction (tests/fixtures/candidates/make_vetting.py). */
const reference = JSON.parse(fixture('candidates/vetting.json').toString('utf8')) as {
	cases: { raDeg: number; decDeg: number; credibleLevel: number; distanceMeanMpc: number; hosts: { distanceMpc: number; cdf: number; pValue: number }[] }[];
};
const peak = reference.cases[0];

let storage: string;
let w: World;
let uninstall: (() => void) | null = null;

beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-vetting-'));
	useStorageRoot(storage);
});
afterAll(async () => {
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
	await stopFakeSmtp();
});
beforeEach(() => {
	createTestDatabase();
	clearVettingCache();
	w = world();
});
afterEach(async () => {
	uninstall?.();
	uninstall = null;
	await vettingIdle();
});

const logged = (action: string) => db.select().from(table.eventLog).where(eq(table.eventLog.action, action)).all();

async function mailTo(email: string, timeoutMs = 3000): Promise<ReceivedMail[]> {
	const until = Date.now() + timeoutMs;
	while (Date.now() < until) {
		const got = receivedMail().filter((m) => m.to.includes(email));
		if (got.length) return got;
		await new Promise((r) => setTimeout(r, 20));
	}
	return [];
}

describe('vetting a candidate on the event’s map and ranked galaxies', () => {
	it('gives the credible level healpy/numpy give and compares the host’s distance as scipy integrates it', () => {
		expect.hasAssertions();
		// The host is 160 Mpc away, 4″ from the candidate; a farther galaxy is ranked first.
		giveGalaxies(w.eventId, w.skymapId, [
			{ name: 'Far galaxy (invented)', raDeg: 150.2, decDeg: -29.9 + 300 / 3600, distanceMpc: 160 },
			{ name: 'Host galaxy (invented)', raDeg: 150.2, decDeg: -29.9 + 4 / 3600, distanceMpc: peak.hosts[0].distanceMpc, distanceErrMpc: 15 }
		]);
		const v = vettingOf(w.candidateId)!;
		expect(v.skymapId).toBe(w.skymapId);
		expect(Math.abs(v.sky!.credibleLevel - peak.credibleLevel)).toBeLessThan(1e-9);
		expect(v.sky!.distanceMeanMpc! / peak.distanceMeanMpc).toBeCloseTo(1, 8);
		expect(v.hosts.host?.galaxy.name).toBe('Host galaxy (invented)');
		expect(v.hosts.host?.galaxy.rank).toBe(2);
		expect(Math.abs(v.hosts.host!.distanceCdf! - peak.hosts[0].cdf)).toBeLessThan(1e-9);
		expect(v.hosts.host!.distancePValue! / peak.hosts[0].pValue).toBeCloseTo(1, 7);
		expect(v.timing.discoveryAfterMergerHours).toBeCloseTo(10.8, 10);
		expect(v.rules.rules.find((r) => r.id === 'inCredibleRegion')?.status).toBe('met');
		expect(v.rules.rules.find((r) => r.id === 'hostDistance')?.status).toBe('met');
		// Only the discovery point so far: the light-curve rules cannot be decided.
		expect(v.rules.verdict).toBe('undecided');
	});
	it('a host far off in distance fails the distance rule', () => {
		expect.hasAssertions();
		giveGalaxies(w.eventId, w.skymapId, [{ name: 'Near-by galaxy (invented)', raDeg: 150.2, decDeg: -29.9 + 60 / 3600, distanceMpc: peak.hosts[1].distanceMpc }]);
		const v = vettingOf(w.candidateId)!;
		expect(v.hosts.host!.distancePValue! / peak.hosts[1].pValue).toBeCloseTo(1, 7);
		expect(v.rules.verdict).toBe('not kilonova-like');
		expect(v.rules.reasons[0]).toMatch(/^Host galaxy's distance agrees with the merger's \(two-sided p ≥ 0\.05\): no/);
	});
	it('without a map says so and leaves the sky rules open', () => {
		expect.hasAssertions();
		const other = world({ withMap: false });
		const v = vettingOf(other.candidateId)!;
		expect(v.sky).toBeNull();
		expect(v.skyNote).toBe('the event has no sky map yet');
		expect(v.rules.rules.find((r) => r.id === 'inCredibleRegion')?.status).toBe('not evaluated');
	});
	it('recomputes only when an input changed', () => {
		expect.hasAssertions();
		expect(vetEvent(w.eventId, { now: NOW })[0].recomputed).toBe(true);
		expect(vetEvent(w.eventId, { now: NOW })[0].recomputed).toBe(false);
		addPhotometryRows({ user: w.observer }, w.candidateId, { rows: [{ time: '2026-12-03T00:40:05Z', filter: 'g', mag: 21.3, mag_err: 0.05 }] }, NOW);
		expect(vetEvent(w.eventId, { now: NOW })[0].recomputed).toBe(false);
		giveGalaxies(w.eventId, w.skymapId, [{ name: 'A galaxy (invented)', raDeg: 10, decDeg: 10, distanceMpc: 100 }]);
		expect(vetEvent(w.eventId, { now: NOW })[0].recomputed).toBe(true);
	});
});

describe('the first kilonova-like verdict', () => {
	it('is announced once: one log entry per room and one e-mail to the duty scientist on shift and each coordinator', async () => {
		expect.hasAssertions();
		const second = person('Colm Coordinator', ['coordinator']);
		giveGalaxies(w.eventId, w.skymapId, [{ name: 'Host galaxy (invented)', raDeg: 150.2, decDeg: -29.9 + 4 / 3600, distanceMpc: 160, distanceErrMpc: 15 }]);
		const out = await addPhotometryCsv({ user: w.observer }, w.candidateId, kilonovaCsv(), NOW);
		expect(out.vetting).toMatchObject({ verdict: 'kilonova-like', firstKilonovaLike: true });
		await vettingIdle();
		for (const p of [w.duty, w.coordinator, second]) {
			const mails = await mailTo(p.email);
			expect(mails, p.name).toHaveLength(1);
			expect(mails[0].subject).toMatch(new RegExp(`^Kilonova-like: ${w.candidateName} in ${w.sourceEventId} · 0\\.1% credible level · host Host galaxy \\(invented\\)$`));
			expect(mails[0].text).toContain(`${config.publicUrl}/events/${w.eventId}/candidates/${w.candidateName}`);
			expect(mails[0].text).toContain('Fades faster than 0.3 mag/day within 7 days of the merger: yes');
		}
		expect(await mailTo(w.observer.email, 200)).toEqual([]);
		expect(logged('candidate.kilonova-like').map((r) => r.room).sort()).toEqual(['board', `event:${w.eventId}`]);

		// New photometry and a forced recomputation keep the verdict; nothing is announced again.
		addPhotometryRows({ user: w.observer }, w.candidateId, { rows: [{ time: '2026-12-08T16:00:00Z', filter: 'i', limit: 24 }] }, NOW);
		expect(vetEvent(w.eventId, { force: true, now: NOW })[0]).toMatchObject({ verdict: 'kilonova-like', firstKilonovaLike: false });
		await vettingIdle();
		expect(logged('candidate.kilonova-like')).toHaveLength(2);
		expect(receivedMail().filter((m) => m.to.includes(w.duty.email))).toHaveLength(1);
	});
});

describe('reacting to the log', () => {
	it('vets again on a new map, a new ranking and new thresholds', async () => {
		expect.hasAssertions();
		uninstall = installVetting();
		await addPhotometryCsv({ user: w.observer }, w.candidateId, kilonovaCsv(), NOW);
		giveGalaxies(w.eventId, w.skymapId, [{ name: 'Host galaxy (invented)', raDeg: 150.2, decDeg: -29.9 + 4 / 3600, distanceMpc: 160 }]);
		record(SYSTEM, 'targets.ranked', 'board', { eventId: w.eventId, skymapId: w.skymapId, galaxies: 1, fields: 0, catalogId: null });
		await vettingIdle();
		expect(vettingOf(w.candidateId)!.rules.verdict).toBe('kilonova-like');

		// A new map whose probability lies elsewhere (the flat NESTED fixture): the credible level changes.
		const newMap = giveMap(w.eventId, new Uint8Array(fixture('sky/flat_nested_map.fits')));
		record(SYSTEM, 'skymap.analysed', 'board', { eventId: w.eventId, skymapId: newMap } as never);
		await vettingIdle();
		const stored = db.select().from(table.candidateVetting).where(eq(table.candidateVetting.candidateId, w.candidateId)).get()!;
		expect(stored.vetting.skymapId).toBe(newMap);
		expect(logged('candidate.vetted').at(-1)?.payload).toMatchObject({ candidateId: w.candidateId, credibleLevel: stored.vetting.sky!.credibleLevel });

		// Thresholds: a fade rate no kilonova reaches makes the fade rule fail.
		giveMap(w.eventId, new Uint8Array(fixture('sky/moc_map.fits')));
		setThresholds(w.coordinator, { fastFade: { minRateMagPerDay: 5 } }, NOW);
		await vettingIdle();
		const after = vettingOf(w.candidateId)!;
		expect(after.rules.verdict).toBe('not kilonova-like');
		expect(after.rules.rules.find((r) => r.id === 'fastFade')?.source.changedFromDefault).toBe(true);
		expect(currentThresholds().rules.find((r) => r.id === 'fastFade')?.changedFromDefault).toBe(true);
		expect(logged('kilonova.thresholds-changed')).toHaveLength(1);
	});
	it('refuses thresholds from non-coordinators and thresholds that cannot be used, naming the problems', () => {
		expect.hasAssertions();
		expect(() => setThresholds(w.duty, {}, NOW)).toThrow(expect.objectContaining({ status: 403 }));
		expect(() => setThresholds(w.coordinator, { credibleRegion: { level: 0.5 } }, NOW)).toThrow('The thresholds cannot be used: the credible level must be between 0.9 and 0.95.');
		expect(() => setThresholds(w.coordinator, { fastFade: { speed: 1 } }, NOW)).toThrow(/fastFade/);
		expect(() => setThresholds(w.coordinator, { decisionSigma: 'two' }, NOW)).toThrow('decisionSigma: the decision sigma must be a number');
		// Each problem is also given per value, keyed by its path, for the form and the API's details.
		expect(() => setThresholds(w.coordinator, { peakLuminosity: { brightestMag: -10 }, fastFade: { withinDays: 0.1 } }, NOW)).toThrow(
			expect.objectContaining({
				fields: {
					'fastFade.withinDays': 'The fade window must be between 0.5 days and 60 days.',
					'peakLuminosity.brightestMag': 'The brightest absolute magnitude must be more negative than the faintest.'
				}
			})
		);
		expect(currentThresholds().changes).toEqual({});
	});
	it('leaves the candidates of a retracted event alone', () => {
		expect.hasAssertions();
		db.update(table.gwEvent).set({ state: 'retracted' }).where(eq(table.gwEvent.id, w.eventId)).run();
		expect(vetEvent(w.eventId, { force: true })).toEqual([]);
	});
});
