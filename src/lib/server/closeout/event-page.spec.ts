import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { saveFile, useStorageRoot } from '../platform/storage';
import { loadSessionUser, type SessionUser } from '../people/auth';
import { clearCoverageCache } from '../coordination/event-coverage';
import { teamWork } from '../coordination/team-work';
import { clearReplayCache, replayBounds } from './sky-replay';
import { eventPage, eventSkyView } from './event-page';
import type { SkyViewData } from '../targeting/event-sky';
import { record, SYSTEM } from '../platform/realtime';
import { eventSkyRaster } from '../targeting/event-sky';
import { analyseSkymap, skyRaster } from '../../sky/index.ts';
import { COVERAGE_CURVE_POINTS_MAX, REPLAY_MOMENTS_MAX, SKY_FOOTPRINTS_MAX, WORK_POINTINGS_PAGE_SIZE } from '../../limits.ts';
import { addCrowdOfPointings } from '../../../../tests/bench/pages/crowd.ts';

const FIX = fileURLToPath(new URL('../../../../tests/fixtures/', import.meta.url));
const HOUR = 3_600_000;
const POINTINGS = 18_000;

let storage: string;
beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-event-page-'));
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

/**
 * An event whose notice arrived a minute after a merger 10 h ago, with the multi-order test map
 * (analysed and rastered as ingestion does), three teams with a wide, a narrow and a round
 * field of view, and `pointings` pointings spread over the 10 h (tests/bench/pages/crowd.ts).
 */
function crowdedEvent(pointings: number): { coordinator: SessionUser; observer: SessionUser } {
	const merger = new Date(Date.now() - 10 * HOUR);
	const scopes = [
		{ team: 'team-w', fovShape: 'rectangle' as const, fovWidthDeg: 3, fovHeightDeg: 3 },
		{ team: 'team-n', fovShape: 'rectangle' as const, fovWidthDeg: 0.4, fovHeightDeg: 0.4 },
		{ team: 'team-c', fovShape: 'circle' as const, fovWidthDeg: 0.7, fovHeightDeg: 0.7 }
	];
	for (const s of scopes) {
		db.insert(table.team).values({ id: s.team, name: `Team ${s.team.slice(5)}`, region: 'Test' }).run();
		db.insert(table.telescope)
			.values({ id: `tel-${s.team}`, teamId: s.team, name: `Scope ${s.team.slice(5)}`, siteName: 'Test site', latitudeDeg: -30, longitudeDeg: -70, elevationM: 2000, apertureM: 1, fovShape: s.fovShape, fovWidthDeg: s.fovWidthDeg, fovHeightDeg: s.fovHeightDeg, filters: ['g', 'r'], limitingMag: 21, limitingMagExposureS: 60 })
			.run();
	}
	const person = (id: string, roles: table.Role[], teamIds: string[]) => {
		db.insert(table.user).values({ id, email: `${id}@page.test`, name: id, passwordHash: 'unused' }).run();
		for (const role of roles) db.insert(table.userRole).values({ userId: id, role }).run();
		for (const teamId of teamIds) db.insert(table.teamMember).values({ teamId, userId: id }).run();
		return loadSessionUser(id)!;
	};
	const coordinator = person('u-coord', ['coordinator'], []);
	const observer = person('u-obs', ['observer'], ['team-w']);

	db.insert(table.gwEvent).values({ id: 'ev-crowd', sourceEventId: 'S-crowd-1', role: 'observation', state: 'active', eventTime: merger }).run();
	const received = new Date(merger.getTime() + 60_000);
	const inbox = db.insert(table.noticeInbox).values({ ivorn: 'ivo://test/crowd#1', rawXml: '<x/>', via: 'api', receivedAt: received, processedAt: received }).returning().get();
	db.insert(table.notice).values({ id: 'n-1', eventId: 'ev-crowd', inboxId: inbox.id, ivorn: 'ivo://test/crowd#1', kind: 'initial', role: 'observation', authoredAt: merger, citations: [], parsed: {} }).run();
	const bytes = new Uint8Array(readFileSync(FIX + 'sky/moc_map.fits'));
	const { map, ...summary } = analyseSkymap(bytes);
	const display = skyRaster(map, { width: 360, height: 180 }) as unknown as Record<string, unknown>;
	const file = saveFile('skymaps', 'crowd.fits', bytes);
	db.insert(table.skymap).values({ id: 'map-1', eventId: 'ev-crowd', noticeId: 'n-1', filePath: file.path, summary, display }).run();
	db.update(table.gwEvent).set({ latestSkymapId: 'map-1', latestNoticeId: 'n-1', latestKind: 'initial' }).run();
	addCrowdOfPointings(db, 'ev-crowd', { pointings });
	return { coordinator, observer };
}

describe('the event page of a crowded event', () => {
	it(`sends aggregates, not every one of ${POINTINGS.toLocaleString('en-GB')} pointings: under 300 kB`, async () => {
		expect.hasAssertions();
		const { coordinator } = crowdedEvent(POINTINGS);
		const first = (await eventPage('ev-crowd', coordinator))!;
		// The sky view is fetched from its own address (sky/view/+server.ts), part of every page load.
		const firstSky = JSON.parse((await eventSkyView('ev-crowd', coordinator))!) as SkyViewData;
		expect(first.sky.url).toMatch(/^\/events\/ev-crowd\/sky\/view\?v=\d+\.\d+\.\d+$/);
		// Every pointing counts in the figures…
		expect(first.coverage!.observations).toBe(POINTINGS);
		expect(firstSky.footprintCount.pointings).toBe(POINTINGS);
		// …while the page carries a bounded picture of them.
		expect(firstSky.footprints.length).toBeLessThanOrEqual(SKY_FOOTPRINTS_MAX);
		expect(firstSky.footprintCount.drawn).toBe(firstSky.footprints.length);
		expect(firstSky.footprintCount.places).toBeGreaterThanOrEqual(firstSky.footprints.length);
		// The chart's curves come with the sky view, thinned.
		const curves = (firstSky as SkyViewData & { curves: { curve: [number, number][]; teams: { teamId: string; curve: [number, number][] }[] } }).curves;
		expect(curves.curve.length).toBeLessThanOrEqual(COVERAGE_CURVE_POINTS_MAX);
		expect(curves.curve.at(-1)![1]).toBeCloseTo(first.coverage!.union, 5);
		expect(curves.teams.map((t) => t.teamId).sort()).toEqual(first.coverage!.teams.map((t) => t.teamId).sort());
		for (const t of curves.teams) expect(t.curve.length).toBeLessThanOrEqual(COVERAGE_CURVE_POINTS_MAX);
		expect(first.replay!.moments.length).toBeLessThanOrEqual(REPLAY_MOMENTS_MAX);
		// The raster itself is fetched from its own path (event-sky.ts eventSkyRaster), not carried in the page.
		expect(firstSky.raster).toBeNull();
		const skymapId = /^\/events\/ev-crowd\/sky\/([^/]+)\/raster$/.exec(firstSky.rasterUrl ?? '')?.[1];
		expect(skymapId).toBeTruthy();
		const served = eventSkyRaster('ev-crowd', skymapId!)!;
		expect(served.raster.density.length).toBeGreaterThan(1000);
		expect(served.etag).toMatch(/^"[\w-]+"$/);
		// A map asked for under another event is not found.
		expect(eventSkyRaster('ev-other', skymapId!)).toBeNull();

		// A warm load (coverage cached, as it is between pointings): the size and time a crowd sees.
		const t0 = performance.now();
		const warm = (await eventPage('ev-crowd', coordinator))!;
		const warmSky = (await eventSkyView('ev-crowd', coordinator))!;
		const ms = performance.now() - t0;
		const bytes = Buffer.byteLength(JSON.stringify(warm)) + Buffer.byteLength(warmSky);
		expect(bytes).toBeLessThan(300_000);
		// The goal is 300 ms on a quiet machine; the bound is wide because the test machine is shared
		// (a run under load average 12 took 690 ms). tests/bench/pages.bench.ts measures it properly.
		expect(ms).toBeLessThan(1500);
	}, 120_000);

	it('builds the shared page once per change of the event: a logged claim shows at once, from each viewer\'s side', async () => {
		expect.hasAssertions();
		const { coordinator, observer } = crowdedEvent(200);
		db.insert(table.eventField).values({ eventId: 'ev-crowd', skymapId: 'map-1', telescopeId: 'tel-team-w', fieldId: 'F-1', raDeg: 10, decDeg: -20, probability: 0.1, cumulative: 0.1, rank: 1 }).run();
		const a = (await eventPage('ev-crowd', coordinator))!;
		const before = JSON.parse((await eventSkyView('ev-crowd', observer))!) as SkyViewData;
		expect(before.targets.find((t) => t.id === 'field:F-1')?.state).toBe('open');
		const b = (await eventPage('ev-crowd', observer))!;
		// One build for both viewers while nothing changed: the same objects, the same sky address.
		expect(b.event).toBe(a.event);
		expect(b.coverage).toBe(a.coverage);
		expect(b.sky.url).toBe(a.sky.url);
		expect(a.openClaims).toBe(0);
		// A claim by the observer's team, logged as the claims module logs it.
		const row = db
			.insert(table.claim)
			.values({ id: 'c-1', eventId: 'ev-crowd', targetKind: 'field', targetId: 'F-1', telescopeId: 'tel-team-w', teamId: 'team-w', userId: 'u-obs', claimedAt: new Date() })
			.returning()
			.get();
		const { id: claimId, eventId, targetKind, targetId, filter, epoch, telescopeId, teamId, userId, state } = row;
		record(SYSTEM, 'claim.claimed', 'event:ev-crowd', { claimId, eventId, targetKind, targetId, filter, epoch, telescopeId, teamId, userId, state });
		const c = (await eventPage('ev-crowd', coordinator))!;
		expect(c.openClaims).toBe(1);
		expect(c.sky.url).not.toBe(a.sky.url);
		expect(c.event).not.toBe(a.event);
		// Each viewer's sky view carries the Sun and Moon now and the same figures.
		const skyOf = async (u: SessionUser) => JSON.parse((await eventSkyView('ev-crowd', u))!) as SkyViewData;
		const [mine, theirs] = [await skyOf(observer), await skyOf(coordinator)];
		expect(mine.targets.find((t) => t.id === 'field:F-1')?.state).toBe('mine');
		expect(theirs.targets.find((t) => t.id === 'field:F-1')?.state).toBe('claimed');
		expect(mine.footprintCount).toEqual(theirs.footprintCount);
		expect(Object.keys(mine).sort()).toEqual(['candidates', 'contours', 'curves', 'footprintCount', 'footprints', 'moon', 'raster', 'rasterUrl', 'sun', 'targets']);
		expect(mine.sun.avoidRadiusDeg).toBeGreaterThan(0);
		// An unknown event has no sky view.
		expect(await eventSkyView('ev-none', coordinator)).toBeNull();
	}, 60_000);

	it('keeps the last change of each replay slice exactly as thinning every pointing would', () => {
		expect.hasAssertions();
		crowdedEvent(REPLAY_MOMENTS_MAX * 3);
		const bounds = replayBounds('ev-crowd')!;
		const created = db.select({ at: table.observation.createdAt }).from(table.observation).all().map((o) => o.at.getTime());
		const sliceMs = (bounds.endMs - bounds.startMs) / REPLAY_MOMENTS_MAX;
		const firstPerSlice = new Map<number, number>();
		for (const t of [...created, bounds.startMs].sort((a, b) => a - b)) {
			const slice = Math.min(REPLAY_MOMENTS_MAX - 1, Math.floor((t - bounds.startMs) / sliceMs));
			if (!firstPerSlice.has(slice)) firstPerSlice.set(slice, t);
		}
		expect(bounds.moments).toEqual([...firstPerSlice.values()]);
	}, 60_000);
});

describe('pointings on "Our claims and pointings", a page at a time', () => {
	it('returns the right slices, newest first, with the total, for every team or one team', () => {
		expect.hasAssertions();
		const { coordinator, observer } = crowdedEvent(1_234);
		const all = db
			.select({ id: table.observation.id, at: table.observation.observedAt, teamId: table.observation.teamId })
			.from(table.observation)
			.all()
			.sort((a, b) => b.at.getTime() - a.at.getTime());
		const size = WORK_POINTINGS_PAGE_SIZE;
		const pages = Math.ceil(all.length / size);

		const first = teamWork('ev-crowd', coordinator);
		expect(first.pointingsPaging).toEqual({ page: 1, pages, total: all.length, pageSize: size });
		expect(first.pointings.map((p) => p.id)).toEqual(all.slice(0, size).map((p) => p.id));
		const third = teamWork('ev-crowd', coordinator, { pointingsPage: 3 });
		expect(third.pointings.map((p) => p.id)).toEqual(all.slice(2 * size, 3 * size).map((p) => p.id));
		const last = teamWork('ev-crowd', coordinator, { pointingsPage: pages });
		expect(last.pointings.map((p) => p.id)).toEqual(all.slice((pages - 1) * size).map((p) => p.id));
		// Past the end: the last page, said so.
		expect(teamWork('ev-crowd', coordinator, { pointingsPage: pages + 5 }).pointingsPaging.page).toBe(pages);

		// An observer sees their own team's pointings only, counted and paged the same way.
		const own = all.filter((p) => p.teamId === 'team-w');
		const mine = teamWork('ev-crowd', observer, { pointingsPage: 2 });
		expect(mine.pointingsPaging).toEqual({ page: 2, pages: Math.ceil(own.length / size), total: own.length, pageSize: size });
		expect(mine.pointings.map((p) => p.id)).toEqual(own.slice(size, 2 * size).map((p) => p.id));
	});
});
