import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { saveFile, useStorageRoot } from '../platform/storage';
import { loadSessionUser, type SessionUser } from '../people/auth';
import { record, SYSTEM } from '../platform/realtime';
import { report } from '../coordination/observations';
import * as claims from '../coordination/claims';
import { clearCoverageCache, eventCoverage } from '../coordination/event-coverage';
import { reportCandidate } from '../candidates/candidates';
import { sunPosition } from '../../targeting/sun-moon.ts';
import { eventTimeline, parseTimelineQuery } from './timeline';
import { clearReplayCache, replayBounds, skyAt } from './sky-replay';
import { TIMELINE_PAGE_SIZE } from '../../limits.ts';

const FIX = fileURLToPath(new URL('../../../../tests/fixtures/', import.meta.url));
/** The coverage fixture's footprints on tests/fixtures/sky/moc_map.fits (made by tests/fixtures/coverage/make_reference.py). */
const ref = JSON.parse(readFileSync(FIX + 'coverage/reference.json', 'utf8')) as {
	footprints: { id: string; group: string; minutesAfterMerger: number; shape: 'rectangle' | 'circle'; raDeg: number; decDeg: number; widthDeg?: number; heightDeg?: number; diameterDeg?: number }[];
};
const MIN = 60_000;
/** The merger three hours before the test runs (pointings may not lie in the future). */
const MERGER = new Date(Math.floor(Date.now() / MIN) * MIN - 180 * MIN);
const at = (minutes: number) => new Date(MERGER.getTime() + minutes * MIN);

let storage: string;
beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-timeline-'));
	useStorageRoot(storage);
});
afterAll(() => {
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
});
beforeEach(() => {
	createTestDatabase();
	clearCoverageCache();
	clearReplayCache();
});

function person(id: string, name: string, roles: table.Role[], teamIds: string[] = []): SessionUser {
	db.insert(table.user).values({ id, email: `${id}@timeline.test`, name, passwordHash: 'unused' }).run();
	for (const role of roles) db.insert(table.userRole).values({ userId: id, role }).run();
	for (const teamId of teamIds) db.insert(table.teamMember).values({ teamId, userId: id }).run();
	return loadSessionUser(id)!;
}

/**
 * The seeded scenario: an initial notice received 2 min after the merger (map: moc_map.fits) and
 * an update authored at +60 min, received at +61 min (map: flat_ring_map.fits); a page sent
 * and acknowledged (page table only, no log row); two teams; claims at +10 (kept) and +20
 * (released at +30); three pointings recorded at +15, +25 and +55 min; a candidate.
 */
function scenario() {
	for (const g of ['team-a', 'team-b']) db.insert(table.team).values({ id: g, name: `Test ${g}`, region: 'Test' }).run();
	const fovOf = (f: (typeof ref.footprints)[number]) => ({
		fovShape: f.shape,
		fovWidthDeg: f.shape === 'circle' ? f.diameterDeg! : f.widthDeg!,
		fovHeightDeg: f.shape === 'circle' ? f.diameterDeg! : f.heightDeg!
	});
	const used = ref.footprints.slice(0, 3);
	for (const f of used) {
		db.insert(table.telescope)
			.values({ id: `tel-${f.id}`, teamId: f.group, name: `Scope ${f.id}`, siteName: 'Test site', latitudeDeg: -30, longitudeDeg: -70, elevationM: 2000, apertureM: 1, ...fovOf(f), filters: ['r'], limitingMag: 21, limitingMagExposureS: 60 })
			.run();
	}
	const duty = person('u-duty', 'Dana Duty', ['duty']);
	const ann = person('u-ann', 'Ann Observer', ['observer'], ['team-a']);
	const bob = person('u-bob', 'Bob Observer', ['observer'], ['team-b']);

	db.insert(table.gwEvent).values({ id: 'ev-1', sourceEventId: 'S-timeline-1', role: 'observation', state: 'active', eventTime: MERGER }).run();
	const notices = [
		{ id: 'n-1', kind: 'initial' as const, authored: 1, received: 2, file: 'sky/moc_map.fits', map: 'map-1' },
		{ id: 'n-2', kind: 'update' as const, authored: 60, received: 61, file: 'sky/flat_ring_map.fits', map: 'map-2' }
	];
	for (const n of notices) {
		const inbox = db.insert(table.noticeInbox).values({ ivorn: `ivo://test/timeline#${n.id}`, rawXml: '<x/>', via: 'api', receivedAt: at(n.received), processedAt: at(n.received) }).returning().get();
		db.insert(table.notice).values({ id: n.id, eventId: 'ev-1', inboxId: inbox.id, ivorn: `ivo://test/timeline#${n.id}`, kind: n.kind, role: 'observation', authoredAt: at(n.authored), citations: [], parsed: {} }).run();
		const file = saveFile('skymaps', `${n.map}.fits`, new Uint8Array(readFileSync(FIX + n.file)));
		db.insert(table.skymap).values({ id: n.map, eventId: 'ev-1', noticeId: n.id, filePath: file.path }).run();
	}
	db.update(table.gwEvent).set({ latestSkymapId: 'map-2', latestNoticeId: 'n-2', latestKind: 'update' }).run();
	db.insert(table.dutyPage).values({ id: 'page-1', eventId: 'ev-1', noticeId: 'n-1', userId: duty.id, level: 0, sentAt: at(2.5), acknowledgedAt: at(5), acknowledgedBy: duty.id, latencyS: 180 }).run();

	// Galaxies opposite the Sun at claim time, so the Sun-avoidance check lets them through.
	const antiSun = (d: Date) => (sunPosition({ latitudeDeg: 0, longitudeDeg: 0, elevationM: 0 }, d).raDeg + 180) % 360;
	db.insert(table.catalog).values({ id: 'cat-1', name: 'Test galaxies (invented)', synthetic: true, columns: {}, state: 'ready' }).run();
	const galaxy = (row: number, name: string, d: Date) =>
		String(db.insert(table.galaxy).values({ catalogId: 'cat-1', row, name, raDeg: antiSun(d), decDeg: -20, distanceMpc: 100, distanceErrMpc: 10, weight: 1, pixel: 0 }).returning().get().id);
	const kept = claims.claim(ann, { eventId: 'ev-1', targetKind: 'galaxy', targetId: galaxy(0, 'TG Kept', at(10)), telescopeId: 'tel-o1' }, at(10));
	const freed = claims.claim(bob, { eventId: 'ev-1', targetKind: 'galaxy', targetId: galaxy(1, 'TG Freed', at(20)), telescopeId: 'tel-o2' }, at(20));
	claims.release(bob, freed.id, 'clouds', at(30));

	const recordedAt = [15, 25, 55];
	used.forEach((f, k) => {
		const { observation } = report(
			{ user: null, telescopeId: `tel-${f.id}`, tokenId: null },
			{ eventId: 'ev-1', observedAt: at(f.minutesAfterMerger).toISOString(), raDeg: f.raDeg, decDeg: f.decDeg, filter: 'r', exposureS: 60, limitingMag: 21 },
			'api'
		);
		db.update(table.observation).set({ createdAt: at(recordedAt[k]) }).where(eq(table.observation.id, observation.id)).run();
	});
	const cand = reportCandidate({ user: ann }, { eventId: 'ev-1', name: 'AT-tl-1', raDeg: 150, decDeg: -30, discoveredAt: at(40).toISOString(), magnitude: 19.5, filter: 'r', teamId: 'team-a' }, at(45));
	db.update(table.candidate).set({ createdAt: at(45) }).where(eq(table.candidate.id, cand.candidate.id)).run();
	// Logged to both rooms with one payload (as targets.ranked is): shown once.
	const ranked = { eventId: 'ev-1', skymapId: 'map-2', galaxies: 2, fields: 0, catalogId: 'cat-1' };
	record(SYSTEM, 'targets.ranked', 'board', ranked);
	record(SYSTEM, 'targets.ranked', 'event:ev-1', ranked);
	const summary = { area50: 40, area90: 212.4, area99: 600, distanceMean: 118.2, distanceStd: 24.4, pixels: 1, maxOrder: 8, probabilitySum: 1, peak: { ra: 150, dec: -30 }, ordering: 'NUNIQ', warnings: [] };
	record(SYSTEM, 'skymap.analysed', 'event:ev-1', { eventId: 'ev-1', noticeId: 'n-2', skymapId: 'map-2', summary });
	return { ann, bob, kept, freed, candidateName: 'AT-tl-1' };
}

describe('eventTimeline', () => {
	it('holds every notice, page, claim, pointing and candidate, in time order, each linked to what it concerns', () => {
		expect.hasAssertions();
		const s = scenario();
		const tl = eventTimeline('ev-1')!;
		const times = tl.entries.map((e) => Date.parse(e.at));
		expect(times).toEqual([...times].sort((a, b) => a - b));

		const notices = tl.entries.filter((e) => e.kind === 'notice');
		expect(notices.map((e) => e.title)).toEqual(['Initial notice received', 'Update notice received']);
		// At the inbox's receipt time, not the authored time.
		expect(notices[1].at).toBe(at(61).toISOString());
		expect(notices[1].sinceMerger).toBe('+1 h 01 min');

		const pages = tl.entries.filter((e) => e.kind === 'page');
		expect(pages).toHaveLength(1);
		expect(pages[0].detail).toContain('Dana Duty');
		expect(pages[0].at).toBe(at(2.5).toISOString());

		expect(tl.entries.filter((e) => e.kind === 'claim').map((e) => e.action)).toEqual(['claim.claimed', 'claim.claimed', 'claim.released']);
		const released = tl.entries.find((e) => e.action === 'claim.released')!;
		expect(released.detail).toContain('TG Freed');
		expect(released.detail).toContain('clouds');
		expect(released.teamName).toBe('Test team-b');
		expect(released.href).toBe('/events/ev-1/targets?team=team-b');

		const pointings = tl.entries.filter((e) => e.kind === 'pointing');
		expect(pointings).toHaveLength(3);
		expect(pointings[0].detail).toContain('through the API');
		expect(tl.entries.find((e) => e.kind === 'sky-map')!.detail).toBe('90% of the probability in 212 deg² · distance 118 ± 24 Mpc');
		const candidate = tl.entries.find((e) => e.kind === 'candidate')!;
		expect(candidate.href).toBe(`/events/ev-1/candidates/${s.candidateName}`);
		expect(candidate.actor).toBe('Ann Observer');
		expect(tl.entries.filter((e) => e.kind === 'targets')).toHaveLength(1);
		expect(tl.counts).toMatchObject({ notice: 2, page: 1, claim: 3, pointing: 3, candidate: 1, targets: 1 });
		expect(tl.total).toBe(tl.entries.length);
	});

	it('filters by kind and by team, from a query string', () => {
		expect.hasAssertions();
		scenario();
		const claimsOnly = eventTimeline('ev-1', parseTimelineQuery(new URLSearchParams('kind=claim')))!;
		expect(claimsOnly.entries.map((e) => e.kind)).toEqual(['claim', 'claim', 'claim']);
		const two = eventTimeline('ev-1', parseTimelineQuery(new URLSearchParams('kind=claim,pointing')))!;
		expect(two.total).toBe(6);
		const teamA = eventTimeline('ev-1', parseTimelineQuery(new URLSearchParams('team=team-a')))!;
		expect(teamA.entries.length).toBeGreaterThan(0);
		expect(teamA.entries.every((e) => e.teamId === 'team-a')).toBe(true);
		// Team a: its claim, two of the three pointings (o1, o3), its candidate.
		expect(teamA.entries.map((e) => e.kind).sort()).toEqual(['candidate', 'claim', 'pointing', 'pointing']);
		const both = eventTimeline('ev-1', parseTimelineQuery(new URLSearchParams('kind=pointing&team=team-b')))!;
		expect(both.total).toBe(1);
		// The filter's choices still count everything.
		expect(both.counts.claim).toBe(3);
		expect(() => parseTimelineQuery(new URLSearchParams('kind=gossip'))).toThrow(/no kind of entry called "gossip"/);
		expect(() => parseTimelineQuery(new URLSearchParams('page=0'))).toThrow(/whole number/);
		expect(() => eventTimeline('ev-1', parseTimelineQuery(new URLSearchParams('team=nobody')))).toThrow(/no such team/);
		expect(eventTimeline('no-such-event')).toBeNull();
	});

	it('pages a long log', () => {
		expect.hasAssertions();
		scenario();
		for (let k = 0; k < TIMELINE_PAGE_SIZE; k++) record(SYSTEM, 'claim.settings', 'event:ev-1', { scope: 'ev-1', lapseMinutes: 30 + k });
		const first = eventTimeline('ev-1', parseTimelineQuery(new URLSearchParams('kind=setting')))!;
		expect(first.total).toBe(TIMELINE_PAGE_SIZE);
		const all = eventTimeline('ev-1')!;
		expect(all.pages).toBe(2);
		expect(all.entries).toHaveLength(TIMELINE_PAGE_SIZE);
		const second = eventTimeline('ev-1', parseTimelineQuery(new URLSearchParams('page=2')))!;
		expect(second.entries.length).toBe(all.total - TIMELINE_PAGE_SIZE);
		expect(Date.parse(second.entries[0].at)).toBeGreaterThanOrEqual(Date.parse(all.entries.at(-1)!.at));
		expect(() => eventTimeline('ev-1', parseTimelineQuery(new URLSearchParams('page=3')))).toThrow(/2 pages/);
	});
});

describe('skyAt', () => {
	it('shows fewer footprints and claims and less coverage earlier, and switches maps at the update’s receipt', async () => {
		expect.hasAssertions();
		const s = scenario();
		const viewer = s.ann;
		const early = (await skyAt('ev-1', at(3), viewer))!;
		expect(early.skymap?.skymapId).toBe('map-1');
		expect(early.counts).toMatchObject({ footprints: 0, openClaims: 0, candidates: 0 });
		expect(early.coverage?.union).toBe(0);

		const mid = (await skyAt('ev-1', at(26), viewer))!;
		expect(mid.counts.footprints).toBe(2);
		expect(mid.counts.openClaims).toBe(2);
		expect(mid.sky.footprints).toHaveLength(2);
		const later = (await skyAt('ev-1', at(56), viewer))!;
		expect(later.counts.footprints).toBe(3);
		// Team b released its claim at +30 min.
		expect(later.counts.openClaims).toBe(1);
		expect(later.counts.candidates).toBe(1);
		expect(later.coverage!.union).toBeGreaterThan(mid.coverage!.union);
		expect(mid.coverage!.union).toBeGreaterThan(0);

		// The update was authored at +60 min but reached us at +61 min.
		expect((await skyAt('ev-1', at(60.5), viewer))!.skymap?.skymapId).toBe('map-1');
		const updated = (await skyAt('ev-1', at(61), viewer))!;
		expect(updated.skymap).toMatchObject({ skymapId: 'map-2', noticeKind: 'update' });

		// At the end, the replay agrees with the event's own coverage figure (same map, same footprints).
		const end = (await skyAt('ev-1', new Date(), viewer))!;
		expect(end.coverage!.union).toBeCloseTo((await eventCoverage('ev-1'))!.union, 12);

		await expect(skyAt('ev-1', at(-30), viewer)).rejects.toThrow(/Choose a moment between/);
		const bounds = replayBounds('ev-1')!;
		expect(bounds.startMs).toBe(at(2).getTime());
		expect(bounds.moments).toContain(at(61).getTime());
		expect(bounds.moments).toContain(at(30).getTime());
		expect(await skyAt('nope', at(3), viewer)).toBeNull();
	});

	it('takes well under a second per step on a cold cache', async () => {
		expect.hasAssertions();
		const s = scenario();
		const t0 = performance.now();
		const step = (await skyAt('ev-1', at(56), s.ann))!;
		const ms = performance.now() - t0;
		console.log(`skyAt one step: ${ms.toFixed(1)} ms (reported computeMs ${step.computeMs.toFixed(1)} ms)`);
		expect(ms).toBeLessThan(1000);
	});
});
