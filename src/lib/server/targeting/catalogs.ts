/**
 * Galaxy catalogues: import a CSV file streamed part by part. Each part (CATALOG_PART_BYTES) is
 * read on the work pool (`readCatalogPart` in `lib/targeting/catalog-csv.ts`: csv-parse, the
 * header, every value checked, each galaxy's HEALPix NESTED pixel at the targeting index order);
 * this thread keeps only the ids seen so far (the duplicate check, `CatalogRowChecker`) and stores
 * the rows of one part while the pool reads the next, in small transactions with a turn of the
 * event loop between them, so that pages stay quick during a million-row import.
 *
 * All or nothing: until the last row is stored the catalogue is `importing`, which nothing ranks
 * against. A fatal problem (no header, a missing column, too large) or any rejected row (unless
 * the importer asked to keep the valid rows) stops the storing, deletes what was stored and leaves
 * the catalogue `failed` with its report; an import cut short by a stop of the server is cleaned
 * up at the next start (`abandonUnfinishedImports`).
 */
import { desc, eq, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId } from '../people/auth';
import { record, type Actor } from '../platform/realtime';
import { CATALOG_FIELDS, catalogPartState, CatalogRowChecker, concatBytes, Utf8Chunks, type CatalogField, type CatalogPartState } from '../../targeting/catalog-csv.ts';
import { INDEX_ORDER } from '../../targeting/galaxies.ts';
import { runWork, WorkPoolBusyError } from '../platform/work-pool';
import type { TaskOutput } from '../platform/work-tasks';
import { ownedBytes } from '../platform/work-memory';
import { InputError } from '../platform/errors';
import { CATALOG_MAX_BYTES, CATALOG_PART_BYTES } from '../../limits.ts';
import { catalogInUse } from '../alerts/events';

/** Luminosity proxies a column can be mapped to ('none': every galaxy weighs the same). */
export const PROXY_FIELDS = ['weight', 'b_abs', 'b_app', 'k_abs', 'k_app', 'mass'] as const;
export type ProxyField = (typeof PROXY_FIELDS)[number];

/** Rejected rows listed in a report (all are counted). */
export const REPORTED_REJECTS = 50;
/** Rows per multi-row INSERT (10 columns each, well under SQLite's bound-parameter limit). */
const INSERT_BATCH = 50;
/**
 * Storing runs in slices: one transaction of INSERT_BATCH-row statements until this much time has
 * passed, then a turn of the event loop (a page load in flight waits one slice per await of its own;
 * ≈ 11 µs of CPU per galaxy here, so a slice is a few hundred rows).
 */
const STORE_SLICE_MS = 4;
/**
 * Then a rest at least as long before the next slice: storing takes at most half of the server's
 * thread, so pages and live messages keep the other half however long the import runs (an import
 * is a background job; a million rows take ≈ 11 s of storing spread over ≈ 22 s or more).
 */
const STORE_REST_MS = 4;
/**
 * Rows whose ids are checked against the million seen before a turn of the event loop (≈ 1 µs
 * each: a part's 14,000 rows held the thread ≈ 11 ms in one piece).
 */
const CHECK_SLICE_ROWS = 3_000;
/** Galaxy rows deleted per statement when a failed import is cleaned up (a turn of the event loop between two). */
const DISCARD_CHUNK = 5_000;
/** How long a part waits for the work pool when it is busy before the import gives up. */
const BUSY_RETRY_MS = 60_000;
/** Least time between two `catalog.progress` messages. */
const PROGRESS_EVERY_MS = 500;

export class CatalogError extends InputError {}

export interface ImportInput {
	name: string;
	sourceNote?: string;
	synthetic?: boolean;
	/**
	 * Catalogue field → CSV header. When given, it is the whole mapping: header columns named like
	 * a catalogue field but not mapped to it are ignored (so "no proxy" or "K magnitude" holds even
	 * when the file also has a `weight` or `b_abs` column). Without it, columns are found by name.
	 */
	columns?: Partial<Record<CatalogField, string>>;
	/** Keep the valid rows when some are rejected (default false: all or nothing). */
	skipInvalid?: boolean;
	maxBytes?: number;
}

/** Anything that hands out the file in pieces. */
export type ChunkSource = ReadableStream<Uint8Array> | AsyncIterable<Uint8Array | string> | Iterable<Uint8Array | string>;

export interface ImportProgress {
	catalogId: string;
	bytes: number;
	/** Lines read so far (comment and header lines included; up to the last part the pool has read). */
	lines: number;
}

export interface ImportOptions {
	/** Called as each chunk is taken from the source (tests watch the streaming through it). */
	onChunk?: (p: ImportProgress) => void;
	/** Log `catalog.progress` on the board at most this often (null: never). Default 500 ms. */
	progressEveryMs?: number | null;
}

export interface ImportOutcome {
	catalogId: string;
	state: 'ready' | 'failed';
	rowCount: number;
	weightSource: string;
	report: table.CatalogImportReport;
	error: string | null;
	mapping: Partial<Record<CatalogField, string>>;
}

function checkInput(input: ImportInput): void {
	const name = input.name?.trim() ?? '';
	if (!name) throw new CatalogError('Give the catalogue a name.', 'name');
	if (name.length > 120) throw new CatalogError('The name is longer than 120 characters.', 'name');
	if ((input.sourceNote ?? '').length > 1000) throw new CatalogError('The source note is longer than 1000 characters.', 'sourceNote');
	const cols = input.columns;
	if (!cols) return;
	for (const [k, v] of Object.entries(cols)) {
		if (!(CATALOG_FIELDS as readonly string[]).includes(k)) throw new CatalogError(`Unknown catalogue field "${k}".`, 'columns');
		if (typeof v !== 'string' || !v.trim()) throw new CatalogError(`The column for ${k} is empty.`, 'columns');
	}
	for (const need of ['ra', 'dec', 'distance'] as const) if (!cols[need]) throw new CatalogError(`Choose the column for ${need}.`, need);
	const proxies = PROXY_FIELDS.filter((p) => cols[p]);
	if (proxies.length > 1) throw new CatalogError(`Choose one luminosity proxy, not ${proxies.join(' and ')}.`, 'proxy');
	const used = Object.values(cols).map((v) => v!.trim().toLowerCase());
	const twice = used.find((v, i) => used.indexOf(v) !== i);
	if (twice) throw new CatalogError(`Column "${twice}" is mapped to two fields.`, 'columns');
}

async function* chunksOf(source: ChunkSource): AsyncGenerator<Uint8Array | string> {
	if (typeof (source as ReadableStream<Uint8Array>).getReader === 'function') {
		const reader = (source as ReadableStream<Uint8Array>).getReader();
		try {
			for (;;) {
				const { done, value } = await reader.read();
				if (done) return;
				yield value;
			}
		} finally {
			reader.releaseLock();
		}
	}
	yield* source as AsyncIterable<Uint8Array | string>;
}

/** A part read by the pool. */
type ReadPart = TaskOutput<'readCatalogPart'>;

/** One part to the pool; a busy pool (every thread taken, the queue full) is asked again for a while. */
async function readPart(state: CatalogPartState, bytes: Uint8Array, final: boolean): Promise<ReadPart> {
	const owned = ownedBytes(bytes);
	const carry = ownedBytes(state.carry);
	const input = { state: { ...state, carry }, bytes: owned, final, pixelOrder: INDEX_ORDER };
	const transfer = [owned.buffer, carry.buffer].filter((b) => b.byteLength > 0);
	const giveUp = Date.now() + BUSY_RETRY_MS;
	for (;;) {
		try {
			return await runWork('readCatalogPart', input, { transfer });
		} catch (e) {
			if (!(e instanceof WorkPoolBusyError) || Date.now() > giveUp) throw e;
			await new Promise((resolve) => setTimeout(resolve, 500));
		}
	}
}

/** The file in parts of about CATALOG_PART_BYTES bytes, pulled from the source as they are needed. */
async function* partsOf(source: ChunkSource, onChunk: (bytes: number) => boolean): AsyncGenerator<Uint8Array> {
	const encoder = new Utf8Chunks();
	let pending: Uint8Array[] = [];
	let size = 0;
	for await (const chunk of chunksOf(source)) {
		const bytes = typeof chunk === 'string' ? encoder.push(chunk) : chunk;
		if (!onChunk(typeof chunk === 'string' ? Buffer.byteLength(chunk) : chunk.byteLength)) return;
		pending.push(bytes);
		size += bytes.length;
		if (size >= CATALOG_PART_BYTES) {
			yield concatBytes(pending);
			pending = [];
			size = 0;
		}
	}
	pending.push(encoder.finish());
	yield concatBytes(pending);
}

/**
 * Import a catalogue from a stream of CSV text. The catalogue row is created first (state
 * `importing`, so the list shows it while it runs), then the file is read part by part on the
 * work pool while the rows of the part before are stored; the outcome is `ready` with every
 * galaxy stored, or `failed` with the report and no galaxy.
 * Logs `catalog.progress` (throttled) and `catalog.imported` / `catalog.failed` on the board.
 */
export async function importCatalog(actor: Actor, input: ImportInput, source: ChunkSource, options: ImportOptions = {}): Promise<ImportOutcome> {
	checkInput(input);
	const maxBytes = input.maxBytes ?? CATALOG_MAX_BYTES;
	const catalogId = randomId();
	const columns = input.columns ? Object.fromEntries(Object.entries(input.columns).map(([k, v]) => [k, v!.trim()])) : {};
	db.insert(table.catalog)
		.values({
			id: catalogId,
			name: input.name.trim(),
			sourceNote: input.sourceNote?.trim() ?? '',
			synthetic: Boolean(input.synthetic),
			columns,
			createdBy: actor.userId,
			state: 'importing'
		})
		.run();
	record(actor, 'catalog.started', 'board', { catalogId, name: input.name.trim(), synthetic: Boolean(input.synthetic) });

	const skipInvalid = input.skipInvalid ?? false;
	// A mapping, when given, is the whole mapping: columns named like a field but not mapped are ignored.
	let state = catalogPartState({ columns, onlyMapped: input.columns !== undefined });
	const checker = new CatalogRowChecker(REPORTED_REJECTS);
	const store = new GalaxyStore(catalogId);
	let bytes = 0;
	let tooLarge: string | null = null;
	let interrupted: string | null = null;
	const every = options.progressEveryMs === undefined ? PROGRESS_EVERY_MS : options.progressEveryMs;
	let lastProgress = Date.now();
	const parts = partsOf(source, (n) => {
		bytes += n;
		if (bytes > maxBytes) {
			tooLarge = `the file is larger than ${Math.round(maxBytes / 1024 / 1024)} MB`;
			return false;
		}
		options.onChunk?.({ catalogId, bytes, lines: state.lineBase });
		return true;
	});
	const nextPart = async (): Promise<IteratorResult<Uint8Array>> => {
		try {
			return await parts.next();
		} catch (e) {
			interrupted = `the upload was interrupted: ${(e as Error).message}`;
			return { done: true, value: undefined };
		}
	};
	let storing: Promise<void> = Promise.resolve();
	let storeError = null as Error | null;
	// Rows are stored only while the outcome can still be `ready`.
	const keepStoring = () => !state.fatal && !storeError && (skipInvalid || checker.rejectedCount === 0);
	let poolError: Error | null = null;
	let next = await nextPart();
	while (!next.done && !state.stopped) {
		// The next part is read from the source while the pool reads this one and the last one is stored.
		const reading = readPart(state, next.value, false);
		next = await nextPart();
		let part: ReadPart;
		try {
			part = await reading;
		} catch (e) {
			poolError = e as Error;
			break;
		}
		state = part.state;
		const kept = await checkPart(checker, part.rows);
		await storing;
		if (keepStoring() && kept.length) storing = store.add(part, kept).catch((e) => void (storeError = e as Error));
		// A tick while more of the file is to come (the last one says how many galaxies are stored).
		if (!next.done && every !== null && Date.now() - lastProgress >= every) {
			lastProgress = Date.now();
			record(actor, 'catalog.progress', 'board', { catalogId, bytes, rows: state.lineBase });
		}
	}
	// Reading stopped before the end of the source (a fatal problem): let the source go.
	if (!next.done) await parts.return(undefined).catch(() => undefined);
	// The end of the file: what is left in the state (a last line without a line break) is read.
	if (!poolError && !tooLarge && !interrupted && !state.stopped) {
		try {
			const part = await readPart(state, new Uint8Array(0), true);
			state = part.state;
			const kept = await checkPart(checker, part.rows);
			await storing;
			if (keepStoring() && kept.length) storing = store.add(part, kept).catch((e) => void (storeError = e as Error));
		} catch (e) {
			poolError = e as Error;
		}
	}
	await storing;

	const report: table.CatalogImportReport = {
		rowsSeen: state.rowsSeen,
		rejectedCount: checker.rejectedCount,
		rejected: checker.rejectedRows,
		fatal: tooLarge ?? state.fatal ?? interrupted ?? (poolError ? `the file could not be read: ${poolError.message}` : null) ?? (state.header === null ? 'no header line' : null),
		bytes
	};
	// Report the user's own columns when a mapping was given.
	const mapping = input.columns ? (columns as Partial<Record<CatalogField, string>>) : state.mapping;
	const error =
		report.fatal ??
		(checker.rejectedCount > 0 && !skipInvalid ? `${checker.rejectedCount} of ${state.rowsSeen} rows were rejected` : store.rows === 0 && !storeError ? 'the file has no galaxy rows' : null) ??
		(storeError ? `the galaxies could not be stored: ${storeError.message}` : null);

	if (error) {
		await discardGalaxies(catalogId);
		db.update(table.catalog).set({ state: 'failed', error, report, columns: mapping as Record<string, string> }).where(eq(table.catalog.id, catalogId)).run();
		record(actor, 'catalog.failed', 'board', { catalogId, error, rejected: report.rejectedCount });
		return { catalogId, state: 'failed', rowCount: 0, weightSource: 'none', report, error, mapping };
	}

	record(actor, 'catalog.progress', 'board', { catalogId, bytes, rows: state.lineBase, storing: store.rows });
	db.$client
		.prepare('UPDATE catalog SET state = ?, row_count = ?, weight_source = ?, report = ?, columns = ?, error = NULL, ready_at = ? WHERE id = ?')
		.run('ready', store.rows, state.weightSource, JSON.stringify(report), JSON.stringify(mapping), Date.now(), catalogId);
	record(actor, 'catalog.imported', 'board', { catalogId, name: input.name.trim(), rows: store.rows, rejected: report.rejectedCount, synthetic: Boolean(input.synthetic) });
	return { catalogId, state: 'ready', rowCount: store.rows, weightSource: state.weightSource, report, error: null, mapping };
}

/** The duplicate-id check of one part, a few thousand rows at a time with a turn of the event loop between. */
async function checkPart(checker: CatalogRowChecker, rows: ReadPart['rows']): Promise<number[]> {
	const kept: number[] = [];
	const cursor = { reason: 0 };
	for (let from = 0; from < rows.size; from += CHECK_SLICE_ROWS) {
		if (from > 0) await new Promise((resolve) => setImmediate(resolve));
		checker.takeRange(rows, from, Math.min(rows.size, from + CHECK_SLICE_ROWS), cursor, kept);
	}
	return kept;
}

const GALAXY_COLUMNS = '(catalog_id, row, name, ra_deg, dec_deg, distance_mpc, distance_err_mpc, weight, b_abs_mag, pixel)';
const GALAXY_VALUES = '(?, ?, ?, ?, ?, ?, ?, ?, ?, ?)';
const GALAXY_PARAMS = 10;

/**
 * Stores a catalogue's kept rows part after part: prepared multi-row INSERTs of INSERT_BATCH
 * rows, one transaction per slice of STORE_SLICE_MS, a rest of STORE_REST_MS between two slices.
 * `row` numbers the kept galaxies from 0 in file order (the CatalogIndex row).
 */
class GalaxyStore {
	rows = 0;
	private readonly full = db.$client.prepare(`INSERT INTO galaxy ${GALAXY_COLUMNS} VALUES ${Array(INSERT_BATCH).fill(GALAXY_VALUES).join(', ')}`);
	private readonly args: unknown[] = new Array(INSERT_BATCH * GALAXY_PARAMS);
	/** Inserts kept[from…] until the slice's time is up or the part is stored; answers where it stopped. */
	private readonly insertSlice = db.$client.transaction((part: ReadPart, kept: number[], from: number): number => {
		const { rows, pixel, bAbsMag } = part;
		const put = (args: unknown[], at: number, i: number) => {
			const b = bAbsMag[i];
			args[at] = this.catalogId;
			args[at + 1] = this.rows++;
			args[at + 2] = rows.id[i];
			args[at + 3] = rows.raDeg[i];
			args[at + 4] = rows.decDeg[i];
			args[at + 5] = rows.distanceMpc[i];
			args[at + 6] = rows.distanceErrMpc[i];
			args[at + 7] = rows.weight[i];
			args[at + 8] = Number.isNaN(b) ? null : b;
			args[at + 9] = pixel[i];
		};
		const until = performance.now() + STORE_SLICE_MS;
		let k = from;
		while (k + INSERT_BATCH <= kept.length) {
			for (let j = 0; j < INSERT_BATCH; j++) put(this.args, j * GALAXY_PARAMS, kept[k + j]);
			this.full.run(this.args);
			k += INSERT_BATCH;
			if (performance.now() >= until) return k;
		}
		if (k < kept.length) {
			const args: unknown[] = new Array((kept.length - k) * GALAXY_PARAMS);
			for (let j = 0; k + j < kept.length; j++) put(args, j * GALAXY_PARAMS, kept[k + j]);
			db.$client.prepare(`INSERT INTO galaxy ${GALAXY_COLUMNS} VALUES ${Array(kept.length - k).fill(GALAXY_VALUES).join(', ')}`).run(args);
		}
		return kept.length;
	});

	constructor(private readonly catalogId: string) {}

	async add(part: ReadPart, kept: number[]): Promise<void> {
		for (let from = 0; from < kept.length; ) {
			from = this.insertSlice(part, kept, from);
			await new Promise((resolve) => setTimeout(resolve, STORE_REST_MS));
		}
	}
}

/** Delete a catalogue's galaxy rows (an import that did not finish), a few thousand at a time with a turn of the event loop between. */
async function discardGalaxies(catalogId: string): Promise<void> {
	const batch = db.$client.prepare('DELETE FROM galaxy WHERE id IN (SELECT id FROM galaxy WHERE catalog_id = ? LIMIT ?)');
	while (batch.run(catalogId, DISCARD_CHUNK).changes > 0) await new Promise((resolve) => setImmediate(resolve));
}

/**
 * At start: imports that were under way when the server stopped cannot go on (the file was a
 * request body). Their rows are deleted and they are marked failed, saying so.
 */
export function abandonUnfinishedImports(): number {
	const unfinished = db.select({ id: table.catalog.id }).from(table.catalog).where(eq(table.catalog.state, 'importing')).all();
	for (const { id } of unfinished) {
		db.delete(table.galaxy).where(eq(table.galaxy.catalogId, id)).run();
		db.update(table.catalog).set({ state: 'failed', error: 'the server stopped during the import; import the file again' }).where(eq(table.catalog.id, id)).run();
	}
	return unfinished.length;
}

export type CatalogRow = table.Catalog;

export function listCatalogs(): CatalogRow[] {
	return db.select().from(table.catalog).orderBy(desc(table.catalog.createdAt)).all();
}

export function getCatalog(id: string): CatalogRow | null {
	return db.select().from(table.catalog).where(eq(table.catalog.id, id)).get() ?? null;
}

/** The catalogue rankings use: the newest ready one. */
export function activeCatalog(): CatalogRow | null {
	const id = catalogInUse();
	return id ? (getCatalog(id) ?? null) : null;
}

/** Galaxies stored for a catalogue (a count straight from the table, for checks and the list). */
export function galaxyCount(catalogId: string): number {
	return db.select({ n: sql<number>`count(*)` }).from(table.galaxy).where(eq(table.galaxy.catalogId, catalogId)).get()?.n ?? 0;
}
