import { afterAll, afterEach, beforeAll, beforeEach, describe, expect, it, vi } from 'vitest';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { saveSkymapFile, saveUpload, useStorageRoot } from '../platform/storage';
import { commitNotice, processInbox } from './ingest';
import { CACHED_SKY_MAPS, clearSkyMapCache, currentSkyMap, skyMapById } from './skymap-cache';
import { installTargets, rankEvent, targetsIdle } from '../targeting/rankings';
import { clearCoverageCache, eventCoverage } from '../coordination/event-coverage';

/** Every stored file read, by path: the cache is measured by what reaches the disk. */
const reads = vi.hoisted(() => [] as string[]);
vi.mock('../platform/storage', async (importOriginal) => {
	const real = await importOriginal<typeof import('../platform/storage')>();
	return {
		...real,
		readStoredFile: (path: string) => {
			reads.push(path);
			return real.readStoredFile(path);
		},
		readStoredFileAsync: (path: string) => {
			reads.push(path);
			return real.readStoredFileAsync(path);
		}
	};
});

const FIX = fileURLToPath(new URL('../../../../tests/fixtures/', import.meta.url));
const mocMap = new Uint8Array(readFileSync(FIX + 'sky/moc_map.fits'));
const flatMap = new Uint8Array(readFileSync(FIX + 'sky/flat_ring_map.fits'));

let storage: string;
let stopTargets: () => void;
beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-skymap-cache-'));
	useStorageRoot(storage);
});
afterAll(() => {
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
});
beforeEach(() => {
	createTestDatabase();
	clearSkyMapCache();
	clearCoverageCache();
	reads.length = 0;
});
afterEach(() => stopTargets?.());

/** An event with `n` stored maps (ids m0 … m{n−1}), the last one current. */
function eventWithMaps(n: number, bytes = mocMap) {
	db.insert(table.gwEvent).values({ id: 'ev-1', sourceEventId: 'S-cache-1', role: 'observation', state: 'active' }).run();
	for (let k = 0; k < n; k++) {
		db.insert(table.notice)
			.values({ id: `n${k}`, eventId: 'ev-1', ivorn: `ivo://test/cache#${k}`, kind: 'update', role: 'observation', authoredAt: new Date(Date.UTC(2026, 11, 2, k)), citations: [], parsed: {} })
			.run();
		const file = saveSkymapFile('ev-1', `n${k}`, bytes);
		db.insert(table.skymap).values({ id: `m${k}`, eventId: 'ev-1', noticeId: `n${k}`, filePath: file.path, sha256: file.sha256, bytes: file.bytes }).run();
	}
	db.update(table.gwEvent).set({ latestSkymapId: `m${n - 1}` }).where(eq(table.gwEvent.id, 'ev-1')).run();
}

describe('the sky-map loader', () => {
	it('parses a new map once: ingestion hands it over, and the ranking job, the coverage and page loads reuse it', async () => {
		stopTargets = installTargets();
		const upload = saveUpload(mocMap).path;
		const xml = readFileSync(FIX + 'notices/bns-initial.xml', 'utf8');
		const { eventId } = await processInbox(commitNotice(xml, 'upload', { uploadedSkymapPath: upload }).inboxId);
		await targetsIdle();
		const current = currentSkyMap(eventId!)!;
		// The ranking job ran on that map.
		expect(db.select().from(table.eventTargetsMeta).where(eq(table.eventTargetsMeta.eventId, eventId!)).get()?.skymapId).toBe(current.skymapId);
		expect(await eventCoverage(eventId!)).toMatchObject({ skymapId: current.skymapId, observations: 0 });
		expect(skyMapById(current.skymapId)).toBe(current.map);
		// The only file read is ingestion's read of the upload; the stored copy is never parsed again.
		expect(reads).toEqual([upload]);
	});

	it('reads a stored map once for several callers, and again only after it has been evicted', async () => {
		eventWithMaps(CACHED_SKY_MAPS + 1);
		const first = skyMapById('m0')!;
		expect(skyMapById('m0')).toBe(first);
		await rankEvent('ev-1', { skymapId: 'm0', catalogId: null });
		expect(reads).toHaveLength(1);

		const last = `m${CACHED_SKY_MAPS}`;
		expect(currentSkyMap('ev-1')?.skymapId).toBe(last);
		expect((await eventCoverage('ev-1'))?.skymapId).toBe(last);
		expect(currentSkyMap('ev-1')?.map).toBe(skyMapById(last));
		expect(reads).toHaveLength(2);

		// m0 was used least recently: filling the cache drops it, the others stay.
		for (let k = 1; k < CACHED_SKY_MAPS; k++) skyMapById(`m${k}`);
		expect(reads).toHaveLength(CACHED_SKY_MAPS + 1);
		skyMapById(last);
		expect(reads).toHaveLength(CACHED_SKY_MAPS + 1);
		expect(skyMapById('m0')).not.toBe(first);
		expect(reads).toHaveLength(CACHED_SKY_MAPS + 2);
	});

	it('gives no map, and reads nothing, for a map whose download or analysis failed or a row that does not exist', () => {
		eventWithMaps(1);
		db.update(table.skymap).set({ error: 'HTTP 503 (will try again)' }).where(eq(table.skymap.id, 'm0')).run();
		expect(skyMapById('m0')).toBeNull();
		expect(currentSkyMap('ev-1')).toBeNull();
		expect(skyMapById('no-such-map')).toBeNull();
		expect(reads).toEqual([]);
	});

	it('does not hand out a cached map when the row under the same id now holds another file', () => {
		eventWithMaps(1);
		const moc = skyMapById('m0')!;
		const file = saveSkymapFile('ev-1', 'n0-flat', flatMap);
		db.update(table.skymap).set({ filePath: file.path, sha256: file.sha256 }).where(eq(table.skymap.id, 'm0')).run();
		const flat = skyMapById('m0')!;
		expect(flat).not.toBe(moc);
		expect(flat.ordering).not.toBe(moc.ordering);
		expect(reads).toHaveLength(2);
	});
});
