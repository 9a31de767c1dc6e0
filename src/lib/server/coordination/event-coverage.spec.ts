import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { saveFile, useStorageRoot } from '../platform/storage';
import { report } from './observations';
import { clearCoverageCache, eventCoverage } from './event-coverage';

const FIX = fileURLToPath(new URL('../../../../tests/fixtures/', import.meta.url));
/**
 * Union coverage of ten overlapping footprints on tests/fixtures/sky/moc_map.fits, computed by
 * tests/fixtures/coverage/make_reference.py with Debian's healpy 1.16.1 (query_polygon /
 * query_disc at order 10, each pixel counted once; versions in VERSIONS.md there).
 */
const ref = JSON.parse(readFileSync(FIX + 'coverage/reference.json', 'utf8')) as {
	footprints: { id: string; group: string; minutesAfterMerger: number; shape: 'rectangle' | 'circle'; raDeg: number; decDeg: number; widthDeg?: number; heightDeg?: number; diameterDeg?: number }[];
	maps: Record<string, { union: number; sumOfOverlaps: number; groups: Record<string, number>; curve: { id: string; minutes: number; union: number }[] }>;
};
const healpy = ref.maps['moc_map.fits'];
const MERGER = new Date('2026-12-02T00:00:00Z');
const NOW = new Date('2026-12-02T04:00:00Z');

let storage: string;
beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-coverage-'));
	useStorageRoot(storage);
});
afterAll(() => {
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
});
beforeEach(() => {
	createTestDatabase();
	clearCoverageCache();
});

/** Three teams; one telescope per reference footprint with that footprint's field of view. */
function world() {
	for (const g of ['team-a', 'team-b', 'team-c']) db.insert(table.team).values({ id: g, name: `Test ${g}`, region: 'Test' }).run();
	for (const f of ref.footprints) {
		db.insert(table.telescope)
			.values({
				id: `tel-${f.id}`,
				teamId: f.group,
				name: `Scope ${f.id}`,
				siteName: 'Test site',
				latitudeDeg: -30,
				longitudeDeg: -70,
				elevationM: 2000,
				apertureM: 1,
				fovShape: f.shape,
				fovWidthDeg: f.shape === 'circle' ? f.diameterDeg! : f.widthDeg!,
				fovHeightDeg: f.shape === 'circle' ? f.diameterDeg! : f.heightDeg!,
				filters: ['r'],
				limitingMag: 21,
				limitingMagExposureS: 60
			})
			.run();
	}
	db.insert(table.gwEvent).values({ id: 'ev-1', sourceEventId: 'S-cover-1', role: 'observation', state: 'active', eventTime: MERGER }).run();
	db.insert(table.notice).values({ id: 'n-1', eventId: 'ev-1', ivorn: 'ivo://test/cover#1', kind: 'initial', role: 'observation', authoredAt: MERGER, citations: [], parsed: {} }).run();
	const file = saveFile('skymaps', 'moc_map.fits', new Uint8Array(readFileSync(FIX + 'sky/moc_map.fits')));
	db.insert(table.skymap).values({ id: 'map-1', eventId: 'ev-1', noticeId: 'n-1', filePath: file.path }).run();
	db.update(table.gwEvent).set({ latestSkymapId: 'map-1' }).run();
}

function observe(f: (typeof ref.footprints)[number]) {
	report(
		{ user: null, telescopeId: `tel-${f.id}`, tokenId: null },
		{ eventId: 'ev-1', observedAt: new Date(MERGER.getTime() + f.minutesAfterMerger * 60_000).toISOString(), raDeg: f.raDeg, decDeg: f.decDeg, filter: 'r', exposureS: 60, limitingMag: 21 },
		'api',
		NOW
	);
}

describe('eventCoverage', () => {
	it('is the union of the reported pointings’ footprints on the current map, per team and in time, as healpy computes it', async () => {
		world();
		expect(await eventCoverage('ev-1')).toMatchObject({ observations: 0, union: 0, teams: [] });
		for (const f of ref.footprints) observe(f);
		const c = (await eventCoverage('ev-1'))!;
		expect(c.observations).toBe(10);
		// Bound: the module's own pixelisation bound, and 1% of healpy's union in practice.
		expect(Math.abs(c.union - healpy.union)).toBeLessThanOrEqual(c.errorBound);
		expect(Math.abs(c.union - healpy.union)).toBeLessThan(0.01 * healpy.union);
		// Overlaps are not counted twice: a plain sum would say 0.48 (healpy's sum of overlaps).
		expect(c.sumOfFootprints).toBeCloseTo(healpy.sumOfOverlaps, 2);
		expect(c.union).toBeLessThan(c.sumOfFootprints - 0.1);
		for (const t of c.teams) expect(Math.abs(t.union - healpy.groups[t.teamId])).toBeLessThan(0.01 * healpy.groups[t.teamId] + 1e-4);
		expect(c.teams.map((t) => t.observations).sort()).toEqual([3, 3, 4]);
		// The curve is in hours since merger and follows healpy's step by step.
		expect(c.curve).toHaveLength(10);
		c.curve.forEach(([h, p], i) => {
			expect(h).toBeCloseTo(healpy.curve[i].minutes / 60, 9);
			expect(Math.abs(p - healpy.curve[i].union)).toBeLessThan(0.01 * healpy.curve[i].union + 1e-4);
		});
		expect(c.footprints[0]).toMatchObject({ id: expect.any(String), teamId: 'team-a', telescopeName: 'Scope o1', shape: { shape: 'rectangle', widthDeg: 3, heightDeg: 2 } });
	});

	it('recomputes when an observation arrives or a new map replaces the old one', async () => {
		world();
		observe(ref.footprints[0]);
		const one = (await eventCoverage('ev-1'))!;
		expect(await eventCoverage('ev-1')).toBe(one); // cached
		observe(ref.footprints[1]);
		const two = (await eventCoverage('ev-1'))!;
		expect(two.union).toBeGreaterThan(one.union);
		expect(Math.abs(two.union - healpy.curve[1].union)).toBeLessThan(0.01 * healpy.curve[1].union);
		// A map with no probability near the pointings (all of it in the other hemisphere's flat map).
		const flat = saveFile('skymaps', 'flat.fits', new Uint8Array(readFileSync(FIX + 'sky/flat_ring_map.fits')));
		db.insert(table.skymap).values({ id: 'map-2', eventId: 'ev-1', noticeId: 'n-1', filePath: flat.path }).run();
		db.update(table.gwEvent).set({ latestSkymapId: 'map-2' }).run();
		const moved = (await eventCoverage('ev-1'))!;
		expect(moved.skymapId).toBe('map-2');
		expect(moved.union).not.toBe(two.union);
	});

	it('gives the ranked galaxy probability observed: inside footprints or named by a completed claim, each galaxy once', async () => {
		world();
		db.insert(table.catalog).values({ id: 'cat', name: 'cat', synthetic: true, columns: {}, state: 'ready' }).run();
		const gal = (raDeg: number, decDeg: number) =>
			db.insert(table.galaxy).values({ catalogId: 'cat', row: 0, name: `G${raDeg}`, raDeg, decDeg, distanceMpc: 80, distanceErrMpc: 8, weight: 1, pixel: 0 }).returning().get().id;
		// Inside o1 (3° × 2° at 150, −30) and o9; inside nothing; named by team-b's done claim.
		const ids = [gal(150.2, -30.1), gal(100, 10), gal(120, 5)];
		const probs = [0.3, 0.2, 0.1];
		ids.forEach((id, i) => db.insert(table.eventGalaxy).values({ eventId: 'ev-1', skymapId: 'map-1', rank: i + 1, galaxyId: id, score: probs[i], probability: probs[i], cumulative: 0 }).run());
		db.insert(table.claim).values({ id: 'c-1', eventId: 'ev-1', targetKind: 'galaxy', targetId: String(ids[2]), telescopeId: 'tel-o2', teamId: 'team-b', state: 'done', claimedAt: NOW, doneAt: NOW }).run();
		observe(ref.footprints[0]);
		observe(ref.footprints[8]);
		const c = (await eventCoverage('ev-1'))!;
		expect(c.galaxies).toMatchObject({ ranked: 3, observedCount: 2 });
		expect(c.galaxies!.probability).toBeCloseTo(0.4, 12);
		expect(c.teams.find((t) => t.teamId === 'team-a')!.galaxyProbability).toBeCloseTo(0.3, 12);
		expect(c.teams.find((t) => t.teamId === 'team-b')).toMatchObject({ observations: 0, union: 0 });
		expect(c.teams.find((t) => t.teamId === 'team-b')!.galaxyProbability).toBeCloseTo(0.1, 12);
	});
	it('adds new observations to the kept union instead of starting again; an earlier observation starts afresh', async () => {
		world();
		const [first, ...rest] = ref.footprints;
		observe(first);
		expect((await eventCoverage('ev-1'))!.update).toBe('recomputed');
		// Two uploads: each page load after it extends the union by that upload's pointings only.
		for (const batch of [rest.slice(0, 4), rest.slice(4)]) {
			for (const f of batch) observe(f);
			expect((await eventCoverage('ev-1'))!.update).toBe('extended');
		}
		const extended = (await eventCoverage('ev-1'))!;
		expect(extended.observations).toBe(10);
		clearCoverageCache();
		const fresh = (await eventCoverage('ev-1'))!;
		expect(fresh.update).toBe('recomputed');
		// Within the two pixelisation bounds of a fresh computation, and of healpy's union.
		expect(Math.abs(extended.union - fresh.union)).toBeLessThanOrEqual(extended.errorBound + fresh.errorBound);
		expect(Math.abs(extended.union - healpy.union)).toBeLessThanOrEqual(extended.errorBound);
		extended.curve.forEach(([h, p], i) => {
			expect(h).toBe(fresh.curve[i][0]);
			expect(Math.abs(p - fresh.curve[i][1])).toBeLessThanOrEqual(extended.errorBound + fresh.errorBound);
		});
		expect(extended.teams.map((t) => [t.teamId, t.observations])).toEqual(fresh.teams.map((t) => [t.teamId, t.observations]));
		// A pointing observed before the latest one counted changes the curve after it: computed afresh.
		observe({ ...first, minutesAfterMerger: first.minutesAfterMerger + 1 });
		const again = (await eventCoverage('ev-1'))!;
		expect(again.update).toBe('recomputed');
		expect(again.observations).toBe(11);
	});
});
