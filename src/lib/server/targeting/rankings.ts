/**
 * From sky map to targets: when an event's sky map has been analysed, rank the galaxies of the
 * event's catalogue inside its 99% credible region (Singer et al. 2016 galaxy targeting, see
 * `lib/targeting/galaxies.ts`) and, for each wide-field telescope, the fields of its fixed sky
 * tiling by enclosed probability (`lib/targeting/fields.ts`). The rankings of an event are kept
 * for its current map only: a new map replaces them in one transaction, which first keeps the old
 * ranks of the targets that open claims hold (`rank_snapshot`, read by coordination/moved-claims.ts).
 *
 * Wide or narrow: a telescope whose field of view covers at least WIDE_FIELD_MIN_DEG2 (1 deg²,
 * `lib/targeting/telescope.ts`, where the reason is given) tiles the sky; a narrower one points
 * at galaxies.
 */
import { and, asc, desc, eq, inArray, notInArray, sql, type SQL } from 'drizzle-orm';
import type { SQLiteColumn } from 'drizzle-orm/sqlite-core';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { onRecorded, record, SYSTEM, type Actor } from '../platform/realtime';
import { JobQueue } from '../platform/periodic';
import { restartService, service } from '../platform/services';
import { loadSkyMap } from '../alerts/skymap-cache';
import { runWork } from '../platform/work-pool';
import { buffersOf } from '../platform/work-memory.ts';
import type { SharedCatalogIndex } from '../platform/work-tasks.ts';
import { activeCatalog, getCatalog } from './catalogs';
import { SUN_ABS_MAG_B } from '../../targeting/catalog-csv.ts';
import { INDEX_ORDER, type GalaxyCatalog, type WeightSource } from '../../targeting/galaxies.ts';
import type { Tiling } from '../../targeting/fields.ts';
import { footprintOf, isWideField } from '../../targeting/telescope.ts';

/** Credible level of the region searched for galaxies and fields. */
export const TARGET_LEVEL = 0.99;
/**
 * Galaxies stored per event (probabilities stay normalised over every candidate). Large enough
 * for a poorly localised event in a deep catalogue; the read side pages and filters on the server.
 */
export const STORED_GALAXIES = 10_000;
/** Fields stored per telescope: until the union reaches this probability, at most MAX_FIELDS. */
export const FIELDS_CUMULATIVE = 0.99;
export const MAX_FIELDS = 300;

// ─── Deliberate caches: a catalogue's index and a field of view's tiling never change once built. ───

interface CachedCatalog {
	catalogId: string;
	/** Built on the work pool, in shared memory; without the galaxies' names (rows are enough to rank). */
	index: SharedCatalogIndex;
	/** galaxy.id of each catalogue row. */
	galaxyIds: Float64Array;
	builtMs: number;
}

const catalogCache = new Map<string, Promise<CachedCatalog>>();
const tilingCache = new Map<string, Promise<Tiling>>();

/** Forget cached indexes (tests switch databases; a deleted catalogue must not linger). */
export function clearTargetCaches(): void {
	catalogCache.clear();
	tilingCache.clear();
}

/** The promise `make` gives for `key`, made once; forgotten again if it fails, so a later call tries afresh. */
function cachedPromise<T>(cache: Map<string, Promise<T>>, key: string, make: () => Promise<T>): Promise<T> {
	let hit = cache.get(key);
	if (!hit) {
		hit = make();
		cache.set(key, hit);
		hit.catch(() => {
			if (cache.get(key) === hit) cache.delete(key);
		});
	}
	return hit;
}

/**
 * The in-memory index of a ready catalogue, built from its galaxy rows once and kept. Rows are
 * read in catalogue order, so index rows are the `row` column. The rows are read here (the
 * database is this thread's); the index is built on the work pool.
 */
export function catalogIndex(catalogId: string): Promise<CachedCatalog> {
	return cachedPromise(catalogCache, catalogId, () => buildIndex(catalogId));
}

/**
 * Rows read per statement when a catalogue's index is built, a turn of the event loop between two:
 * a million galaxies read in one statement held the server's thread for 4.4 s (the live bench's
 * profile); ≈ 4 µs a row, so a slice is under 20 ms. The values go straight into typed arrays
 * (a million small row arrays kept until the end cost as much again in garbage collection).
 */
const INDEX_READ_ROWS = 4096;

/** The catalogue's columns as the index wants them, with each row's galaxy id. */
type GalaxyColumns = Pick<GalaxyCatalog, 'raDeg' | 'decDeg' | 'distanceMpc' | 'distanceErrMpc' | 'weight' | 'luminosityB10'> & { n: number; galaxyIds: Float64Array };

/** A catalogue's galaxies in file order, read a slice at a time by (catalog_id, row). */
async function readGalaxyColumns(catalogId: string, expected: number): Promise<GalaxyColumns> {
	const slice = db.$client
		.prepare('SELECT id, ra_deg, dec_deg, distance_mpc, distance_err_mpc, weight, b_abs_mag, row FROM galaxy WHERE catalog_id = ? AND row > ? ORDER BY row LIMIT ?')
		.raw();
	let size = Math.max(expected, INDEX_READ_ROWS);
	const names = ['galaxyIds', 'raDeg', 'decDeg', 'distanceMpc', 'distanceErrMpc', 'weight', 'lum'] as const;
	let cols = Object.fromEntries(names.map((k) => [k, new Float64Array(size)])) as Record<(typeof names)[number], Float64Array>;
	let n = 0;
	let anyB = false;
	for (let after = -1; ; ) {
		const got = slice.all(catalogId, after, INDEX_READ_ROWS) as [number, number, number, number, number, number, number | null, number][];
		if (n + got.length > size) {
			// More rows than the catalogue said: grow.
			size = Math.max(2 * size, n + got.length);
			const grown = Object.fromEntries(names.map((k) => [k, new Float64Array(size)])) as typeof cols;
			for (const k of names) grown[k].set(cols[k].subarray(0, n));
			cols = grown;
		}
		for (const r of got) {
			cols.galaxyIds[n] = r[0];
			cols.raDeg[n] = r[1];
			cols.decDeg[n] = r[2];
			cols.distanceMpc[n] = r[3];
			cols.distanceErrMpc[n] = r[4];
			cols.weight[n] = r[5];
			// L_B / 10^10 L_B,⊙ = 10^(−0.4 (M_B − M_B,⊙)) / 10^10, as the parser computed it.
			cols.lum[n] = r[6] === null ? NaN : 10 ** (-0.4 * (r[6] - SUN_ABS_MAG_B)) / 1e10;
			if (r[6] !== null) anyB = true;
			n++;
		}
		if (got.length < INDEX_READ_ROWS) break;
		after = got[got.length - 1][7];
		await new Promise((resolve) => setImmediate(resolve));
	}
	// Exactly n long, each in its own buffer (transferred to the pool whole).
	const fit = (a: Float64Array) => (a.length === n ? a : a.slice(0, n));
	return {
		n,
		galaxyIds: fit(cols.galaxyIds),
		raDeg: fit(cols.raDeg),
		decDeg: fit(cols.decDeg),
		distanceMpc: fit(cols.distanceMpc),
		distanceErrMpc: fit(cols.distanceErrMpc),
		weight: fit(cols.weight),
		luminosityB10: anyB ? fit(cols.lum) : null
	};
}

async function buildIndex(catalogId: string): Promise<CachedCatalog> {
	const started = performance.now();
	const meta = getCatalog(catalogId);
	if (!meta || meta.state !== 'ready') throw new Error(`catalogue ${catalogId} is not ready`);
	const c = await readGalaxyColumns(catalogId, meta.rowCount);
	const { galaxyIds } = c;
	const cat: Omit<GalaxyCatalog, 'id'> = {
		size: c.n,
		raDeg: c.raDeg,
		decDeg: c.decDeg,
		distanceMpc: c.distanceMpc,
		distanceErrMpc: c.distanceErrMpc,
		weight: c.weight,
		luminosityB10: c.luminosityB10,
		weightSource: meta.weightSource as WeightSource
	};
	const index = await runWork('buildCatalogIndex', { catalog: cat, order: INDEX_ORDER }, { transfer: buffersOf(cat) });
	return { catalogId, index, galaxyIds, builtMs: performance.now() - started };
}

/** The tiling of a telescope's field of view, made on the work pool once per field of view. */
function tilingFor(t: table.Telescope): Promise<Tiling> {
	const fov = footprintOf(t);
	return cachedPromise(tilingCache, JSON.stringify(fov), () => runWork('tileSky', { fov }));
}

export interface RankSummary {
	eventId: string;
	skymapId: string;
	catalogId: string | null;
	galaxies: number;
	candidates: number;
	fields: Record<string, number>;
	computeMs: number;
}

/**
 * Keep the current ranks of the targets that open claims of an event hold (replacing the last
 * snapshot). Called inside the ranking's transaction, before the old ranking is deleted; galaxies
 * match by galaxy row id, fields by telescope and field id.
 */
export function snapshotHeldRanks(tx: Pick<typeof db, 'run' | 'delete'>, eventId: string): void {
	tx.delete(table.rankSnapshot).where(eq(table.rankSnapshot.eventId, eventId)).run();
	tx.run(sql`
		INSERT INTO rank_snapshot (event_id, target_kind, telescope_id, target_id, from_skymap_id, from_catalog_id, rank, probability)
		SELECT g.event_id, 'galaxy', '', CAST(g.galaxy_id AS TEXT), g.skymap_id, m.catalog_id, g.rank, g.probability
		FROM event_galaxy g JOIN event_targets_meta m ON m.event_id = g.event_id
		WHERE g.event_id = ${eventId} AND g.galaxy_id IN (
			SELECT CAST(c.target_id AS INTEGER) FROM claim c
			WHERE c.event_id = ${eventId} AND c.target_kind = 'galaxy' AND c.state IN ('claimed', 'observing'))`);
	tx.run(sql`
		INSERT INTO rank_snapshot (event_id, target_kind, telescope_id, target_id, from_skymap_id, from_catalog_id, rank, probability)
		SELECT f.event_id, 'field', f.telescope_id, f.field_id, f.skymap_id, m.catalog_id, f.rank, f.probability
		FROM event_field f JOIN event_targets_meta m ON m.event_id = f.event_id
		WHERE f.event_id = ${eventId} AND EXISTS (
			SELECT 1 FROM claim c
			WHERE c.event_id = f.event_id AND c.target_kind = 'field' AND c.target_id = f.field_id
				AND c.telescope_id = f.telescope_id AND c.state IN ('claimed', 'observing'))`);
}

/**
 * Rank targets for an event's sky map (default: the map the event shows now) and replace what
 * was stored for the event. Logs `targets.ranked` to the board and the event's room.
 */
export async function rankEvent(eventId: string, opts: { skymapId?: string; catalogId?: string | null; actor?: Actor } = {}): Promise<RankSummary | null> {
	const started = performance.now();
	const event = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!event) return null;
	const skymapId = opts.skymapId ?? event.latestSkymapId;
	if (!skymapId) return null;
	const map = await loadSkyMap(skymapId);
	if (!map) return null;

	// The event's own catalogue (chosen when it arrived, or by a coordinator since), not whatever was imported last.
	const catalogId = opts.catalogId === undefined ? event.catalogId : opts.catalogId;
	let galaxyRows: (typeof table.eventGalaxy.$inferInsert)[] = [];
	let meta: Omit<typeof table.eventTargetsMeta.$inferInsert, 'fieldCounts' | 'computedAt' | 'computeMs'> = {
		eventId,
		skymapId,
		catalogId,
		level: TARGET_LEVEL,
		mode: null,
		regionAreaDeg2: null,
		candidates: 0,
		galaxiesStored: 0,
		withoutDistance: 0,
		completeness: null
	};
	// Galaxies and every wide-field telescope's fields, ranked in one task on the work pool (the map
	// and the index are in shared memory: nothing is copied to get them there).
	const cached = catalogId ? await catalogIndex(catalogId) : null;
	const wide = db.select().from(table.telescope).orderBy(asc(table.telescope.name)).all().filter(isWideField);
	const tilings = await Promise.all(wide.map(async (t) => ({ key: t.id, tiling: await tilingFor(t) })));
	const ranked = await runWork('rankTargets', {
		map,
		index: cached?.index ?? null,
		galaxies: { level: TARGET_LEVEL, limit: STORED_GALAXIES },
		tilings,
		fields: { level: TARGET_LEVEL }
	});
	if (cached && ranked.galaxies) {
		const { galaxyIds } = cached;
		const g = ranked.galaxies;
		galaxyRows = g.galaxies.map((r) => ({
			eventId,
			skymapId,
			rank: r.rank,
			galaxyId: galaxyIds[r.row],
			score: r.score,
			probability: r.probability,
			cumulative: r.cumulative,
			distancePValue: r.distancePValue
		}));
		const c = g.completeness;
		meta = {
			...meta,
			mode: g.mode,
			regionAreaDeg2: g.regionAreaDeg2,
			candidates: g.candidates,
			galaxiesStored: galaxyRows.length,
			withoutDistance: g.withoutDistance,
			completeness: c
				? { distanceRangeMpc: c.distanceRangeMpc, ratio: c.ratio, catalogLuminosityB10: c.catalogLuminosityB10, expectedLuminosityB10: c.expectedLuminosityB10 }
				: null
		};
	}

	const fieldRows: (typeof table.eventField.$inferInsert)[] = [];
	const fieldCounts: Record<string, number> = {};
	for (const { key: telescopeId, ranking } of ranked.fields) {
		let n = 0;
		for (const f of ranking.fields) {
			if (n >= MAX_FIELDS) break;
			fieldRows.push({ eventId, skymapId, telescopeId, fieldId: f.id, raDeg: f.raDeg, decDeg: f.decDeg, probability: f.probability, cumulative: f.cumulative, rank: f.rank });
			n++;
			if (f.cumulative >= FIELDS_CUMULATIVE) break;
		}
		fieldCounts[telescopeId] = n;
	}
	const computeMs = performance.now() - started;

	db.transaction((tx) => {
		// Before the old ranking goes: keep the ranks of the targets open claims hold, for the teams to be told what moved.
		snapshotHeldRanks(tx, eventId);
		tx.delete(table.eventGalaxy).where(eq(table.eventGalaxy.eventId, eventId)).run();
		tx.delete(table.eventField).where(eq(table.eventField.eventId, eventId)).run();
		tx.delete(table.eventTargetsMeta).where(eq(table.eventTargetsMeta.eventId, eventId)).run();
		// Prepared statements run per row: the query builder's multi-row inserts took ≈ 0.2 s for a
		// 10,000-galaxy ranking, all of it on the server's thread inside this transaction.
		const putGalaxy = db.$client.prepare(
			'INSERT INTO event_galaxy (event_id, skymap_id, rank, galaxy_id, score, probability, cumulative, distance_p_value) VALUES (?, ?, ?, ?, ?, ?, ?, ?)'
		);
		for (const g of galaxyRows) putGalaxy.run(g.eventId, g.skymapId, g.rank, g.galaxyId, g.score, g.probability, g.cumulative, g.distancePValue ?? null);
		const putField = db.$client.prepare(
			'INSERT INTO event_field (event_id, skymap_id, telescope_id, field_id, ra_deg, dec_deg, probability, cumulative, rank) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)'
		);
		for (const f of fieldRows) putField.run(f.eventId, f.skymapId, f.telescopeId, f.fieldId, f.raDeg, f.decDeg, f.probability, f.cumulative, f.rank);
		tx.insert(table.eventTargetsMeta).values({ ...meta, fieldCounts, computeMs, computedAt: new Date() }).run();
	});
	const summary: RankSummary = { eventId, skymapId, catalogId, galaxies: galaxyRows.length, candidates: meta.candidates ?? 0, fields: fieldCounts, computeMs };
	const payload = { eventId, skymapId, galaxies: galaxyRows.length, fields: fieldRows.length, catalogId };
	const actor = opts.actor ?? SYSTEM;
	record(actor, 'targets.ranked', 'board', payload);
	record(actor, 'targets.ranked', `event:${eventId}`, payload);
	return summary;
}

// ─── Reacting to the log: one ranking at a time, in arrival order. ───

/** Rankings read a file and can take a while: they run off the recording call stack, one at a time. */
const rankingJobs = (): JobQueue => service('ranking-jobs', () => new JobQueue('target ranking'));

/** Resolves when every ranking asked for so far has finished (tests, shutdown). */
export async function targetsIdle(): Promise<void> {
	await rankingJobs().idle();
}

/**
 * At start-up, in the background: build the index of the catalogue the next event will be ranked
 * against and of those active events use, so that the first notice after a restart does not wait
 * for it (a million galaxies take ≈ 5 s to read, in slices, and index).
 */
async function warmCatalogIndexes(): Promise<void> {
	const ids = new Set<string>();
	const next = activeCatalog();
	if (next) ids.add(next.id);
	for (const e of db.select({ catalogId: table.gwEvent.catalogId }).from(table.gwEvent).where(eq(table.gwEvent.state, 'active')).all()) {
		if (e.catalogId) ids.add(e.catalogId);
	}
	for (const id of ids) {
		try {
			await catalogIndex(id);
		} catch (e) {
			// Not fatal: the ranking that needs it tries again and reports its own failure.
			console.error(`catalogue ${id}: index not built at start-up: ${(e as Error).message}`);
		}
	}
}

async function rankNewMap(eventId: string, skymapId: string): Promise<void> {
	// A map that arrived late for an older notice is not the one the event shows: keep the current ranking.
	const current = db.select({ id: table.gwEvent.latestSkymapId }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (current?.id !== skymapId) return;
	await rankEvent(eventId, { skymapId });
}

/**
 * Events whose current sky map has no ranking: never ranked (the process stopped between the
 * map's analysis and its ranking), or ranked for an older map. Each gets one job of its own.
 * Returns their ids.
 */
export function rankMissing(): string[] {
	const missing = db
		.select({ id: table.gwEvent.id })
		.from(table.gwEvent)
		.innerJoin(table.skymap, eq(table.skymap.id, table.gwEvent.latestSkymapId))
		.leftJoin(table.eventTargetsMeta, eq(table.eventTargetsMeta.eventId, table.gwEvent.id))
		.where(
			and(
				sql`${table.skymap.error} IS NULL`,
				sql`${table.skymap.filePath} IS NOT NULL`,
				sql`(${table.eventTargetsMeta.skymapId} IS NULL OR ${table.eventTargetsMeta.skymapId} <> ${table.gwEvent.latestSkymapId})`
			)
		)
		.orderBy(asc(table.gwEvent.createdAt))
		.all()
		.map((r) => r.id);
	for (const id of missing) {
		rankingJobs().enqueue(async () => {
			// Ranked meanwhile by the job an analysed map queued: nothing to do.
			const now = db
				.select({ map: table.gwEvent.latestSkymapId, ranked: table.eventTargetsMeta.skymapId })
				.from(table.gwEvent)
				.leftJoin(table.eventTargetsMeta, eq(table.eventTargetsMeta.eventId, table.gwEvent.id))
				.where(eq(table.gwEvent.id, id))
				.get();
			if (!now?.map || now.ranked === now.map) return;
			await rankEvent(id);
		});
	}
	return missing;
}

/**
 * Start reacting to analysed sky maps, catalogue switches and processed notices, and rank at once
 * any event whose current map has no ranking (a ranking under way when the process stopped is lost
 * with it). A newly imported catalogue re-ranks nothing: it is the default for events that arrive
 * from now on, and a coordinator switches an event under way to it on purpose (event-catalog.ts).
 * Installing twice replaces the first.
 */
export function installTargets(): () => void {
	return restartService('targets', () => {
		rankingJobs().enqueue(rankMissing);
		rankingJobs().enqueue(warmCatalogIndexes);
		// Each is logged to the board and the event's room: react to the board copy only.
		const offs = [
			onRecorded('skymap.analysed', ({ eventId, skymapId }, m) => {
				if (m.room === 'board') rankingJobs().enqueue(() => rankNewMap(eventId, skymapId));
			}),
			onRecorded('targets.catalog-switched', ({ eventId }, m) => {
				if (m.room === 'board') rankingJobs().enqueue(async () => void (await rankEvent(eventId)));
			}),
			// After every notice: a ranking that a crash or an error lost is made again.
			onRecorded('notice.processed', (_p, m) => {
				if (m.room === 'board') rankingJobs().enqueue(rankMissing);
			})
		];
		return {
			stop() {
				for (const off of offs) off();
			}
		};
	});
}

// ─── Read side ───

export const GALAXY_SORTS = ['rank', 'name', 'distance', 'ra', 'dec'] as const;
export type GalaxySort = (typeof GALAXY_SORTS)[number];

export interface GalaxyTarget {
	rank: number;
	galaxyId: number;
	name: string;
	ra: number;
	dec: number;
	distance: number;
	distanceErr: number;
	score: number;
	probability: number;
	cumulative: number;
	/** Two-sided tail probability of the catalogued distance under the map's distance posterior there (null: 2-D map, or ranked before it was kept). */
	distancePValue: number | null;
}

export function targetsMeta(eventId: string) {
	const meta = db.select().from(table.eventTargetsMeta).where(eq(table.eventTargetsMeta.eventId, eventId)).get() ?? null;
	if (!meta) return null;
	const cat = meta.catalogId ? getCatalog(meta.catalogId) : null;
	return { ...meta, catalog: cat ? { id: cat.id, name: cat.name, synthetic: cat.synthetic, rowCount: cat.rowCount } : null };
}

/**
 * Claim states that make a target "taken" for someone choosing what to observe: open claims and
 * finished ones. Released and lapsed claims freed the target again.
 */
export const HELD_CLAIM_STATES = ['claimed', 'observing', 'done'] as const;

/**
 * Which targets to keep. `sky` is a vectorised position test (e.g. "observable now"): it gets
 * the RA/Dec of every row that passed the database filters and returns 1 for the rows to keep,
 * so the database still does the claim filters and the ordering.
 */
export interface TargetFilter {
	/** No claim in HELD_CLAIM_STATES on the target. */
	unclaimed?: boolean;
	/** A claim in HELD_CLAIM_STATES by this team on the target. */
	teamId?: string | null;
	sky?: ((raDeg: Float64Array, decDeg: Float64Array) => Uint8Array) | null;
}

export interface TargetPage<T> {
	/** Rows that match the filter. */
	total: number;
	/** Rows stored, before filtering. */
	stored: number;
	rows: T[];
}

/** Target ids (as the claim table spells them) held by claims of an event. */
function heldTargets(eventId: string, kind: 'galaxy' | 'field', teamId?: string | null) {
	const conditions = [eq(table.claim.eventId, eventId), eq(table.claim.targetKind, kind), inArray(table.claim.state, [...HELD_CLAIM_STATES])];
	if (teamId) conditions.push(eq(table.claim.teamId, teamId));
	const id = kind === 'galaxy' ? sql<number>`CAST(${table.claim.targetId} AS INTEGER)` : sql<string>`${table.claim.targetId}`;
	return db.select({ id }).from(table.claim).where(and(...conditions));
}

function claimConditions(eventId: string, kind: 'galaxy' | 'field', column: SQLiteColumn, f: TargetFilter): SQL[] {
	// IN / NOT IN over a subquery: SQLite builds the claimed set once, not once per row.
	const out: SQL[] = [];
	if (f.unclaimed) out.push(notInArray(column, heldTargets(eventId, kind)));
	if (f.teamId) out.push(inArray(column, heldTargets(eventId, kind, f.teamId)));
	return out;
}

/**
 * Pages through rows that the database has filtered and ordered, applying the optional sky test
 * to every such row in one vectorised call: `positions` returns [key, ra, dec] of each filtered row
 * in order (a light query), `details` the full rows for the keys of the page.
 */
function pageWithSky<K, T>(
	f: TargetFilter,
	offset: number,
	limit: number,
	count: () => number,
	page: () => T[],
	positions: () => [K, number, number][],
	details: (keys: K[]) => T[],
	keyOf: (row: T) => K
): { total: number; rows: T[] } {
	if (!f.sky) return { total: count(), rows: page() };
	const all = positions();
	const ra = new Float64Array(all.length);
	const dec = new Float64Array(all.length);
	all.forEach((r, k) => {
		ra[k] = r[1];
		dec[k] = r[2];
	});
	const keep = f.sky(ra, dec);
	const kept: K[] = [];
	for (let k = 0; k < all.length; k++) if (keep[k]) kept.push(all[k][0]);
	const pageKeys = kept.slice(offset, offset + limit);
	const byKey = new Map(details(pageKeys).map((r) => [keyOf(r), r]));
	return { total: kept.length, rows: pageKeys.map((key) => byKey.get(key)!).filter(Boolean) };
}

/**
 * Ranked galaxies of an event, a page at a time, in a chosen order, optionally filtered by claim
 * state, claiming team and a sky test. `total` counts the matching rows; `stored` every row.
 */
export function eventGalaxies(
	eventId: string,
	o: { offset?: number; limit?: number; sort?: GalaxySort; dir?: 'asc' | 'desc'; filter?: TargetFilter } = {}
): { total: number; stored: number; galaxies: GalaxyTarget[] } {
	const limit = Math.max(1, Math.min(o.limit ?? 50, STORED_GALAXIES));
	const offset = Math.max(0, o.offset ?? 0);
	const f = o.filter ?? {};
	const column = {
		rank: table.eventGalaxy.rank,
		name: table.galaxy.name,
		distance: table.galaxy.distanceMpc,
		ra: table.galaxy.raDeg,
		dec: table.galaxy.decDeg
	}[o.sort ?? 'rank'];
	const order = o.dir === 'desc' ? desc(column) : asc(column);
	const ofEvent = eq(table.eventGalaxy.eventId, eventId);
	const where = and(ofEvent, ...claimConditions(eventId, 'galaxy', table.eventGalaxy.galaxyId, f));
	const countWhere = (w: SQL | undefined, join: boolean) => {
		const q = db.select({ n: sql<number>`count(*)` }).from(table.eventGalaxy);
		return (join ? q.innerJoin(table.galaxy, eq(table.galaxy.id, table.eventGalaxy.galaxyId)) : q).where(w).get()?.n ?? 0;
	};
	const stored = countWhere(ofEvent, false);
	const select = () =>
		db
			.select({
				rank: table.eventGalaxy.rank,
				galaxyId: table.eventGalaxy.galaxyId,
				name: table.galaxy.name,
				ra: table.galaxy.raDeg,
				dec: table.galaxy.decDeg,
				distance: table.galaxy.distanceMpc,
				distanceErr: table.galaxy.distanceErrMpc,
				score: table.eventGalaxy.score,
				probability: table.eventGalaxy.probability,
				cumulative: table.eventGalaxy.cumulative,
				distancePValue: table.eventGalaxy.distancePValue
			})
			.from(table.eventGalaxy)
			.innerJoin(table.galaxy, eq(table.galaxy.id, table.eventGalaxy.galaxyId));
	const { total, rows } = pageWithSky<number, GalaxyTarget>(
		f,
		offset,
		limit,
		() => (f.unclaimed || f.teamId ? countWhere(where, false) : stored),
		() => select().where(where).orderBy(order, asc(table.eventGalaxy.rank)).limit(limit).offset(offset).all(),
		() =>
			db
				.select({ rank: table.eventGalaxy.rank, ra: table.galaxy.raDeg, dec: table.galaxy.decDeg })
				.from(table.eventGalaxy)
				.innerJoin(table.galaxy, eq(table.galaxy.id, table.eventGalaxy.galaxyId))
				.where(where)
				.orderBy(order, asc(table.eventGalaxy.rank))
				.all()
				.map((r) => [r.rank, r.ra, r.dec] as [number, number, number]),
		(ranks) => (ranks.length ? select().where(and(ofEvent, inArray(table.eventGalaxy.rank, ranks))).all() : []),
		(g) => g.rank
	);
	return { total, stored, galaxies: rows };
}

export interface FieldTarget {
	telescopeId: string;
	rank: number;
	fieldId: string;
	ra: number;
	dec: number;
	probability: number;
	cumulative: number;
}

const fieldColumns = {
	telescopeId: table.eventField.telescopeId,
	rank: table.eventField.rank,
	fieldId: table.eventField.fieldId,
	ra: table.eventField.raDeg,
	dec: table.eventField.decDeg,
	probability: table.eventField.probability,
	cumulative: table.eventField.cumulative
};

/** Ranked fields of an event, for one telescope or all, best first. */
export function eventFields(eventId: string, telescopeId?: string | null): FieldTarget[] {
	return db
		.select(fieldColumns)
		.from(table.eventField)
		.where(telescopeId ? and(eq(table.eventField.eventId, eventId), eq(table.eventField.telescopeId, telescopeId)) : eq(table.eventField.eventId, eventId))
		.orderBy(asc(table.eventField.telescopeId), asc(table.eventField.rank))
		.all();
}

export const FIELD_SORTS = ['rank', 'field', 'ra', 'dec'] as const;
export type FieldSort = (typeof FIELD_SORTS)[number];

/** One telescope's ranked fields a page at a time, sorted and filtered like `eventGalaxies`. */
export function eventFieldsPage(
	eventId: string,
	telescopeId: string,
	o: { offset?: number; limit?: number; sort?: FieldSort; dir?: 'asc' | 'desc'; filter?: TargetFilter } = {}
): TargetPage<FieldTarget> {
	const limit = Math.max(1, Math.min(o.limit ?? 50, MAX_FIELDS));
	const offset = Math.max(0, o.offset ?? 0);
	const f = o.filter ?? {};
	const column = { rank: table.eventField.rank, field: table.eventField.fieldId, ra: table.eventField.raDeg, dec: table.eventField.decDeg }[o.sort ?? 'rank'];
	const order = o.dir === 'desc' ? desc(column) : asc(column);
	const ofScope = and(eq(table.eventField.eventId, eventId), eq(table.eventField.telescopeId, telescopeId));
	const where = and(ofScope, ...claimConditions(eventId, 'field', table.eventField.fieldId, f));
	const count = (w: SQL | undefined) => db.select({ n: sql<number>`count(*)` }).from(table.eventField).where(w).get()?.n ?? 0;
	const stored = count(ofScope);
	const { total, rows } = pageWithSky<number, FieldTarget>(
		f,
		offset,
		limit,
		() => (f.unclaimed || f.teamId ? count(where) : stored),
		() => db.select(fieldColumns).from(table.eventField).where(where).orderBy(order, asc(table.eventField.rank)).limit(limit).offset(offset).all(),
		() =>
			db
				.select({ rank: table.eventField.rank, ra: table.eventField.raDeg, dec: table.eventField.decDeg })
				.from(table.eventField)
				.where(where)
				.orderBy(order, asc(table.eventField.rank))
				.all()
				.map((r) => [r.rank, r.ra, r.dec] as [number, number, number]),
		(ranks) => (ranks.length ? db.select(fieldColumns).from(table.eventField).where(and(ofScope, inArray(table.eventField.rank, ranks))).all() : []),
		(r) => r.rank
	);
	return { total, stored, rows };
}

/** `GET /api/v1/events/{id}/galaxies` body (shape kept stable for programs). */
export function galaxiesResponse(eventId: string, limit: number) {
	const meta = targetsMeta(eventId);
	const { galaxies } = eventGalaxies(eventId, { limit });
	return {
		eventId,
		skymapId: meta?.skymapId ?? null,
		catalog: meta?.catalog ?? null,
		galaxies: galaxies.map((g) => ({
			rank: g.rank,
			galaxyId: g.galaxyId,
			name: g.name,
			ra: g.ra,
			dec: g.dec,
			distance: g.distance,
			score: g.score,
			probability: g.probability,
			cumulative: g.cumulative
		}))
	};
}

/** `GET /api/v1/events/{id}/fields?telescope=` body. */
export function fieldsResponse(eventId: string, telescopeId: string | null) {
	const meta = targetsMeta(eventId);
	return {
		eventId,
		skymapId: meta?.skymapId ?? null,
		fields: eventFields(eventId, telescopeId).map((f) => ({
			telescopeId: f.telescopeId,
			rank: f.rank,
			fieldId: f.fieldId,
			ra: f.ra,
			dec: f.dec,
			probability: f.probability,
			cumulative: f.cumulative
		}))
	};
}
