/**
 * Parsed sky maps, read from their stored files once. After a new map arrives, the ranking job,
 * the event's coverage and the network plan's coverage all need it: each asking by sky-map id
 * gets the same parsed map. Ingestion hands over the map it has just analysed, so even the first
 * of them reads nothing.
 *
 * A sky-map row never changes its file once analysed, so the id (with the file's checksum, which
 * guards against a test database reusing an id) identifies the content: no invalidation is needed.
 * A few maps are kept (the events being followed now), the least recently used dropped first; a
 * multi-order map with distance layers is a few MB.
 */
import { eq } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { readStoredFile, readStoredFileAsync } from '../platform/storage';
import { readSkyMap, type SkyMap } from '../../sky/index.ts';
import { runWork } from '../platform/work-pool';
import { ownedBytes } from '../platform/work-memory.ts';

export const CACHED_SKY_MAPS = 4;

interface Entry {
	/** sha256 of the file, or its path for rows stored without one. */
	content: string;
	map: SkyMap;
}

const cache = new Map<string, Entry>();

interface StoredRow {
	filePath: string | null;
	sha256: string | null;
	error: string | null;
}

function storedRow(skymapId: string): StoredRow | undefined {
	return db
		.select({ filePath: table.skymap.filePath, sha256: table.skymap.sha256, error: table.skymap.error })
		.from(table.skymap)
		.where(eq(table.skymap.id, skymapId))
		.get();
}

function contentKey(row: StoredRow): string {
	return row.sha256 ?? `path:${row.filePath}`;
}

function remember(skymapId: string, entry: Entry): void {
	cache.delete(skymapId);
	cache.set(skymapId, entry);
	while (cache.size > CACHED_SKY_MAPS) cache.delete(cache.keys().next().value!);
}

/**
 * The cached map of row `skymapId` when the cache holds it for the stored content; otherwise the
 * row and its content key to read it with; null when the row holds no usable map.
 */
function lookUp(skymapId: string): { map: SkyMap } | { row: StoredRow & { filePath: string }; content: string } | null {
	const row = storedRow(skymapId);
	if (!row || row.error || !row.filePath) return null;
	const content = contentKey(row);
	const hit = cache.get(skymapId);
	if (hit && hit.content === content) {
		remember(skymapId, hit);
		return { map: hit.map };
	}
	return { row: { ...row, filePath: row.filePath }, content };
}

/**
 * The parsed sky map of row `skymapId`; null when there is no such row or it holds no usable map
 * (its download or analysis failed).
 */
export function skyMapById(skymapId: string): SkyMap | null {
	const look = lookUp(skymapId);
	if (!look || 'map' in look) return look?.map ?? null;
	const { row, content } = look;
	const bytes = readStoredFile(row.filePath);
	const map = readSkyMap(new Uint8Array(bytes.buffer, bytes.byteOffset, bytes.byteLength));
	remember(skymapId, { content, map });
	return map;
}

/**
 * `skyMapById` with the file read on the work pool on a cache miss, so that the event loop is not
 * held while a large map is parsed. The map comes back in shared memory: the tasks that rank or
 * cover it post it to their threads without a copy. Prefer this wherever the caller can wait.
 */
export async function loadSkyMap(skymapId: string): Promise<SkyMap | null> {
	const look = lookUp(skymapId);
	if (!look || 'map' in look) return look?.map ?? null;
	const { row, content } = look;
	const bytes = ownedBytes(await readStoredFileAsync(row.filePath));
	const map = await runWork('readSkyMap', { bytes }, { transfer: [bytes.buffer] });
	// Another caller may have read it meanwhile: keep one copy.
	const again = cache.get(skymapId);
	if (again && again.content === content) return again.map;
	remember(skymapId, { content, map });
	return map;
}

function currentSkyMapId(eventId: string): string | null {
	const event = db.select({ skymapId: table.gwEvent.latestSkymapId }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	return event?.skymapId ?? null;
}

/** The map an event shows now (its latest analysed one) with its id; null when it has none. */
export function currentSkyMap(eventId: string): { skymapId: string; map: SkyMap } | null {
	const skymapId = currentSkyMapId(eventId);
	if (!skymapId) return null;
	const map = skyMapById(skymapId);
	return map ? { skymapId, map } : null;
}

/** `currentSkyMap`, read on the work pool on a cache miss (`loadSkyMap`). */
export async function loadCurrentSkyMap(eventId: string): Promise<{ skymapId: string; map: SkyMap } | null> {
	const skymapId = currentSkyMapId(eventId);
	if (!skymapId) return null;
	const map = await loadSkyMap(skymapId);
	return map ? { skymapId, map } : null;
}

/**
 * Keep a map just parsed from the bytes stored as row `skymapId` (ingestion, once the row is
 * written), so that nobody reads the file again. `map` must come from `readSkyMap(bytes)` with
 * the default options, as `skyMapById` would make it.
 */
export function keepSkyMap(skymapId: string, map: SkyMap): void {
	const row = storedRow(skymapId);
	if (row && !row.error && row.filePath) remember(skymapId, { content: contentKey(row), map });
}

export function clearSkyMapCache(): void {
	cache.clear();
}
