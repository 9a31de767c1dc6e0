/**
 * Galaxy catalogues: import a CSV file streamed chunk by chunk through the catalogue parser
 * (`lib/targeting/catalog-csv.ts`), then store every galaxy with its HEALPix NESTED pixel at the
 * targeting index order in ONE transaction, or nothing at all.
 *
 * All or nothing: the rows are inserted only after the whole file was read and validated; a
 * fatal problem (no header, a missing column, too large) or any rejected row (unless the
 * importer asked to keep the valid rows) leaves the catalogue `failed` with its report and no
 * galaxy rows. The insert itself runs in one SQLite transaction, so a crash half-way leaves
 * nothing either.
 */
import { desc, eq, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId } from '../people/auth';
import { record, type Actor } from '../platform/realtime';
import { CATALOG_FIELDS, parseCatalogCsvStream, SUN_ABS_MAG_B, type CatalogCsvResult, type CatalogField } from '../../targeting/catalog-csv.ts';
import { INDEX_ORDER } from '../../targeting/galaxies.ts';
import { radecToNest } from '../../sky/index.ts';
import { InputError } from '../platform/errors';
import { CATALOG_MAX_BYTES } from '../../limits.ts';
import { catalogInUse } from '../alerts/events';

/** Luminosity proxies a column can be mapped to ('none': every galaxy weighs the same). */
export const PROXY_FIELDS = ['weight', 'b_abs', 'b_app', 'k_abs', 'k_app', 'mass'] as const;
export type ProxyField = (typeof PROXY_FIELDS)[number];

/** Rejected rows listed in a report (all are counted). */
export const REPORTED_REJECTS = 50;
/** Rows per multi-row INSERT (11 columns each, well under SQLite's bound-parameter limit). */
const INSERT_BATCH = 200;
/** Galaxies per transaction when storing; the event loop gets a turn between two (≈ 10–20 ms each). */
const STORE_CHUNK = 1_000;
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
	/** Lines read so far (comment and header lines included). */
	lines: number;
}

export interface ImportOptions {
	/** Called after each chunk was parsed (tests watch the streaming through it). */
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

/**
 * Rewrites the header line so that the parser sees exactly the mapped columns under the
 * catalogue's own field names, and every other column under a name it will not pick up.
 * Lines before the header (comments, blanks) pass through; the header is found the way the
 * parser finds it (first line that is neither blank nor a `#` comment).
 */
class HeaderRewriter {
	private done = false;
	private buffer = '';
	constructor(private readonly columns: Partial<Record<CatalogField, string>>) {}

	push(text: string): string {
		if (this.done) return text;
		this.buffer += text;
		let out = '';
		for (;;) {
			const nl = this.buffer.indexOf('\n');
			if (nl < 0) return out;
			const line = this.buffer.slice(0, nl + 1);
			this.buffer = this.buffer.slice(nl + 1);
			const bare = line.replace(/^\uFEFF/, '').replace(/\r?\n$/, '');
			if (bare.trim() === '' || bare.startsWith('#')) {
				out += line;
				continue;
			}
			this.done = true;
			const rest = this.buffer;
			this.buffer = '';
			return out + this.rewrite(bare) + '\n' + rest;
		}
	}

	finish(): string {
		const rest = this.buffer;
		this.buffer = '';
		if (this.done || !rest) return rest;
		this.done = true;
		const bare = rest.replace(/^\uFEFF/, '');
		return bare.trim() === '' || bare.startsWith('#') ? rest : this.rewrite(bare);
	}

	private rewrite(header: string): string {
		// A quoted header is left alone: the parser's own mapping handles it (without the ignore rule).
		if (header.includes('"')) return header;
		const byHeader = new Map<string, CatalogField>();
		for (const [field, col] of Object.entries(this.columns)) byHeader.set(col!.trim().toLowerCase(), field as CatalogField);
		const fieldNames = new Set<string>(CATALOG_FIELDS);
		return header
			.split(',')
			.map((raw) => {
				const name = raw.trim();
				const field = byHeader.get(name.toLowerCase());
				if (field) return field;
				return fieldNames.has(name.toLowerCase()) ? `unmapped:${name}` : name;
			})
			.join(',');
	}
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

function countNewlines(s: string): number {
	let n = 0;
	for (let i = s.indexOf('\n'); i >= 0; i = s.indexOf('\n', i + 1)) n++;
	return n;
}

/**
 * Import a catalogue from a stream of CSV text. The catalogue row is created first (state
 * `importing`, so the list shows it while it runs), then the file is read chunk by chunk; the
 * outcome is `ready` with every galaxy stored, or `failed` with the report and no galaxy.
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

	const rewriter = input.columns ? new HeaderRewriter(columns) : null;
	const decoder = new TextDecoder('utf-8');
	let bytes = 0;
	let lines = 0;
	let fatal: string | null = null;
	const every = options.progressEveryMs === undefined ? PROGRESS_EVERY_MS : options.progressEveryMs;
	let lastProgress = Date.now();
	const fed = (text: string) => {
		lines += countNewlines(text);
		return rewriter ? rewriter.push(text) : text;
	};
	// The file as text, chunk by chunk, as the parser asks for it (pull: never far ahead of it).
	async function* text(): AsyncGenerator<string> {
		for await (const chunk of chunksOf(source)) {
			const piece = typeof chunk === 'string' ? chunk : decoder.decode(chunk, { stream: true });
			bytes += typeof chunk === 'string' ? Buffer.byteLength(chunk) : chunk.byteLength;
			if (bytes > maxBytes) {
				fatal = `the file is larger than ${Math.round(maxBytes / 1024 / 1024)} MB`;
				return;
			}
			yield fed(piece);
			options.onChunk?.({ catalogId, bytes, lines });
			if (every !== null && Date.now() - lastProgress >= every) {
				lastProgress = Date.now();
				record(actor, 'catalog.progress', 'board', { catalogId, bytes, rows: lines });
			}
		}
		yield fed(decoder.decode());
		if (rewriter) yield rewriter.finish();
	}
	const result: CatalogCsvResult = await parseCatalogCsvStream(text(), { skipInvalid: input.skipInvalid ?? false, maxReported: REPORTED_REJECTS });
	const report: table.CatalogImportReport = {
		rowsSeen: result.rowsSeen,
		rejectedCount: result.rejected.count,
		rejected: result.rejected.rows,
		fatal: fatal ?? result.fatal,
		bytes
	};
	// The parser saw canonical names when the header was rewritten: report the user's own columns.
	const mapping = rewriter ? (columns as Partial<Record<CatalogField, string>>) : result.mapping;
	const error =
		report.fatal ??
		(!result.ok ? `${result.rejected.count} of ${result.rowsSeen} rows were rejected` : result.catalog!.size === 0 ? 'the file has no galaxy rows' : null);

	if (error || !result.catalog) {
		db.update(table.catalog).set({ state: 'failed', error, report, columns: mapping as Record<string, string> }).where(eq(table.catalog.id, catalogId)).run();
		record(actor, 'catalog.failed', 'board', { catalogId, error, rejected: report.rejectedCount });
		return { catalogId, state: 'failed', rowCount: 0, weightSource: 'none', report, error, mapping };
	}

	const cat = result.catalog;
	record(actor, 'catalog.progress', 'board', { catalogId, bytes, rows: lines, storing: cat.size });
	try {
		await storeGalaxies(catalogId, cat, { report, mapping });
	} catch (e) {
		const why = `the galaxies could not be stored: ${(e as Error).message}`;
		discardGalaxies(catalogId);
		db.update(table.catalog).set({ state: 'failed', error: why, report, columns: mapping as Record<string, string> }).where(eq(table.catalog.id, catalogId)).run();
		record(actor, 'catalog.failed', 'board', { catalogId, error: why, rejected: report.rejectedCount });
		return { catalogId, state: 'failed', rowCount: 0, weightSource: 'none', report, error: why, mapping };
	}
	record(actor, 'catalog.imported', 'board', { catalogId, name: input.name.trim(), rows: cat.size, rejected: report.rejectedCount, synthetic: Boolean(input.synthetic) });
	return { catalogId, state: 'ready', rowCount: cat.size, weightSource: cat.weightSource, report, error: null, mapping };
}

/**
 * Insert every galaxy (prepared multi-row INSERTs) in transactions of `STORE_CHUNK` rows with a
 * turn of the event loop between them, so that page loads and live messages are served while a
 * million-row catalogue is stored; the last transaction flips the catalogue to ready. Until then
 * the catalogue is `importing`, which nothing ranks against, so the rows already stored are never
 * read; a failure deletes them (`discardGalaxies`), and an import cut short by a stop of the
 * server is cleaned up at the next start (`abandonUnfinishedImports`).
 */
async function storeGalaxies(
	catalogId: string,
	cat: NonNullable<CatalogCsvResult['catalog']>,
	meta: { report: table.CatalogImportReport; mapping: Partial<Record<CatalogField, string>> }
): Promise<void> {
	const client = db.$client;
	const cols = '(catalog_id, row, name, ra_deg, dec_deg, distance_mpc, distance_err_mpc, weight, b_abs_mag, pixel)';
	const one = '(?, ?, ?, ?, ?, ?, ?, ?, ?, ?)';
	const statement = (n: number) => client.prepare(`INSERT INTO galaxy ${cols} VALUES ${Array(n).fill(one).join(', ')}`);
	const full = statement(INSERT_BATCH);
	const lum = cat.luminosityB10;
	const values = (k: number): unknown[] => {
		const l = lum ? lum[k] : NaN;
		// Back from L_B (10^10 L_B,⊙) to M_B with the parser's M_B,⊙ (catalog-csv.ts).
		const bAbs = l > 0 ? SUN_ABS_MAG_B - 2.5 * Math.log10(l * 1e10) : null;
		return [catalogId, k, cat.id[k], cat.raDeg[k], cat.decDeg[k], cat.distanceMpc[k], cat.distanceErrMpc[k], cat.weight[k], bAbs, radecToNest(INDEX_ORDER, cat.raDeg[k], cat.decDeg[k])];
	};
	const insertRange = client.transaction((from: number, to: number) => {
		let k = from;
		for (; k + INSERT_BATCH <= to; k += INSERT_BATCH) {
			const args: unknown[] = [];
			for (let j = k; j < k + INSERT_BATCH; j++) args.push(...values(j));
			full.run(args);
		}
		if (k < to) {
			const args: unknown[] = [];
			for (let j = k; j < to; j++) args.push(...values(j));
			statement(to - k).run(args);
		}
	});
	for (let from = 0; from < cat.size; from += STORE_CHUNK) {
		insertRange(from, Math.min(cat.size, from + STORE_CHUNK));
		await new Promise((resolve) => setImmediate(resolve));
	}
	client
		.prepare('UPDATE catalog SET state = ?, row_count = ?, weight_source = ?, report = ?, columns = ?, error = NULL, ready_at = ? WHERE id = ?')
		.run('ready', cat.size, cat.weightSource, JSON.stringify(meta.report), JSON.stringify(meta.mapping), Date.now(), catalogId);
}

/** Delete a catalogue's galaxy rows (an import that did not finish). */
function discardGalaxies(catalogId: string): void {
	db.delete(table.galaxy).where(eq(table.galaxy.catalogId, catalogId)).run();
}

/**
 * At start: imports that were under way when the server stopped cannot go on (the file was a
 * request body). Their rows are deleted and they are marked failed, saying so.
 */
export function abandonUnfinishedImports(): number {
	const unfinished = db.select({ id: table.catalog.id }).from(table.catalog).where(eq(table.catalog.state, 'importing')).all();
	for (const { id } of unfinished) {
		discardGalaxies(id);
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
