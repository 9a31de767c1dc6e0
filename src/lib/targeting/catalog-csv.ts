/**
 * Reader for galaxy catalogues in CSV (RFC 4180: quoted fields, doubled quotes, quoted line breaks;
 * CRLF or LF; an optional UTF-8 byte-order mark), the CSV itself read by csv-parse
 * (`lib/csv-read.ts`): `parseCatalogCsvStream` streams a file of any size (memory bounded by the
 * chunk in hand and the columnar arrays), `parseCatalogCsv` reads a text held whole. Pure: text in,
 * columnar arrays and a report of the rows it rejected out. It never hands back part of a catalogue
 * by accident: unless `skipInvalid` is set, one bad row makes the whole result `ok: false` with no rows.
 *
 * Lines starting with `#` before the header are comments (the synthetic catalogue labels itself so);
 * they are set aside line by line before csv-parse sees the text, so a quote in a comment is harmless.
 *
 * Luminosity proxies and their conversion to a weight (luminosity in units of 10^10 solar):
 *  - B magnitude (absolute, or apparent with the row's distance): L_B / L_B,⊙ = 10^(−0.4 (M_B − M_B,⊙)),
 *    M_B,⊙ = 5.48 (Binney & Merrifield 1998, Table 2.1; from memory);
 *  - K magnitude likewise with M_K,⊙ = 3.28 (same source; from memory);
 *  - stellar mass in solar masses, used as mass / 10^10;
 *  - an explicit `weight` column, used as given.
 * Apparent → absolute: M = m − 5 log10(d / 10 pc) = m − 5 log10(d_Mpc) − 25 (standard distance modulus).
 */
import type { GalaxyCatalog, WeightSource } from './galaxies.ts';
import { readCsv, streamCsv, type CsvReadError } from '../csv-read.ts';

/** Catalogue fields a CSV column can be mapped to. */
export const CATALOG_FIELDS = ['id', 'ra', 'dec', 'distance', 'distance_err', 'weight', 'b_abs', 'b_app', 'k_abs', 'k_app', 'mass'] as const;
export type CatalogField = (typeof CATALOG_FIELDS)[number];

/** Solar absolute magnitudes (Binney & Merrifield 1998, Table 2.1; from memory). */
export const SUN_ABS_MAG_B = 5.48;
export const SUN_ABS_MAG_K = 3.28;

export interface CatalogCsvOptions {
	/** Catalogue field → CSV header name; unmapped fields are looked up by their own name (case-insensitive). */
	columns?: Partial<Record<CatalogField, string>>;
	/** Largest distance accepted, Mpc (default 2000: beyond any ground-based kilonova reach). */
	maxDistanceMpc?: number;
	/** Keep the valid rows when some are rejected (default false: all or nothing). */
	skipInvalid?: boolean;
	/** How many rejected rows are listed (all are counted). Default 100. */
	maxReported?: number;
	/** Refuse catalogues with more rows than this (default 5,000,000). */
	maxRows?: number;
}

export interface RejectedRow {
	/** 1-based physical line on which the record starts. */
	line: number;
	reason: string;
}

export interface CatalogCsvResult {
	/** True when the catalogue can be used: no fatal error and (unless skipInvalid) no rejected row. */
	ok: boolean;
	/** A problem with the file as a whole (no header, missing required column, too many rows). */
	fatal: string | null;
	/** The rows read; null unless ok. */
	catalog: GalaxyCatalog | null;
	/** Number of data rows seen (accepted + rejected). */
	rowsSeen: number;
	rejected: { count: number; rows: RejectedRow[] };
	/** Header names → catalogue fields actually used. */
	mapping: Partial<Record<CatalogField, string>>;
}

class GrowableF64 {
	data = new Float64Array(1024);
	length = 0;
	push(v: number): void {
		if (this.length === this.data.length) {
			const next = new Float64Array(this.data.length * 2);
			next.set(this.data);
			this.data = next;
		}
		this.data[this.length++] = v;
	}
	toArray(): Float64Array {
		return this.data.slice(0, this.length);
	}
}

/**
 * Sets aside what comes before the header: a byte-order mark, blank lines and `#` comment lines,
 * counting them so that line numbers stay those of the file. Everything from the header on passes
 * through unchanged.
 */
class Prelude {
	/** Lines set aside. */
	skipped = 0;
	private done = false;
	private started = false;
	private buffer = '';

	push(chunk: string): string {
		if (this.done) return chunk;
		this.buffer += chunk;
		if (!this.started && this.buffer.length > 0) {
			if (this.buffer.charCodeAt(0) === 0xfeff) this.buffer = this.buffer.slice(1);
			this.started = true;
		}
		for (;;) {
			const nl = this.buffer.indexOf('\n');
			const line = nl < 0 ? this.buffer : this.buffer.slice(0, nl);
			const blank = line.trim() === '';
			if (nl < 0 && (blank || line.startsWith('#'))) return '';
			if (!blank && !line.startsWith('#')) {
				this.done = true;
				const rest = this.buffer;
				this.buffer = '';
				return rest;
			}
			this.skipped++;
			this.buffer = this.buffer.slice(nl + 1);
		}
	}

	/** The end of the file: anything held back (a last comment line without a line break) is dropped. */
	finish(): string {
		this.done = true;
		this.buffer = '';
		return '';
	}
}

function parseNumber(s: string): number {
	const t = s.trim();
	return t === '' ? NaN : Number(t);
}

/**
 * Streaming catalogue parser: `push(chunk)` any number of times, then `finish()`.
 * Chunks may split lines, CRLF pairs and quoted fields anywhere.
 */
export class CatalogCsvParser {
	private readonly options: Required<Omit<CatalogCsvOptions, 'columns'>> & { columns: Partial<Record<CatalogField, string>> };
	private header: string[] | null = null;
	private fieldIndex: Partial<Record<CatalogField, number>> = {};
	private fatal: string | null = null;
	private rowsSeen = 0;
	private rejectedCount = 0;
	private rejectedRows: RejectedRow[] = [];
	private readonly ids: string[] = [];
	private readonly seenIds = new Map<string, number>();
	private readonly ra = new GrowableF64();
	private readonly dec = new GrowableF64();
	private readonly dist = new GrowableF64();
	private readonly distErr = new GrowableF64();
	private readonly weight = new GrowableF64();
	private readonly lumB = new GrowableF64();
	private weightSource: WeightSource = 'none';
	private mapping: Partial<Record<CatalogField, string>> = {};

	constructor(options: CatalogCsvOptions = {}) {
		this.options = {
			columns: options.columns ?? {},
			maxDistanceMpc: options.maxDistanceMpc ?? 2000,
			skipInvalid: options.skipInvalid ?? false,
			maxReported: options.maxReported ?? 100,
			maxRows: options.maxRows ?? 5_000_000
		};
		for (const k of Object.keys(this.options.columns)) {
			if (!(CATALOG_FIELDS as readonly string[]).includes(k)) throw new RangeError(`unknown catalogue field "${k}" (known: ${CATALOG_FIELDS.join(', ')})`);
		}
	}

	/** csv-parse could not read the record starting on `line`: it stops reading there. */
	unreadable(e: CsvReadError): void {
		if (this.fatal) return;
		if (this.header === null) this.fatal = `line ${e.line}: malformed header (unbalanced quotes)`;
		else if (e.kind === 'unclosed-quote') this.reject(e.line, 'unterminated quoted field');
		else this.fatal = `line ${e.line}: malformed quoting (a quoted field has text after its closing quote); the rows after it were not read`;
	}

	/** The end of the upload, cut short with this reason (too large, interrupted). */
	abort(reason: string): void {
		this.fatal ??= reason;
	}

	private reject(line: number, reason: string): void {
		this.rejectedCount++;
		if (this.rejectedRows.length < this.options.maxReported) this.rejectedRows.push({ line, reason });
	}

	/** One record (cells as csv-parse read them, trimmed outside quotes) and the line it starts on. */
	record(f: string[], line: number): void {
		if (this.fatal) return;
		if (this.header === null) {
			this.setHeader(f, line);
			return;
		}
		if (f.length === 1 && f[0] === '') return;
		this.rowsSeen++;
		if (this.rowsSeen > this.options.maxRows) {
			this.fatal = `more than ${this.options.maxRows} rows`;
			return;
		}
		if (f.length !== this.header.length) return this.reject(line, `expected ${this.header.length} fields, found ${f.length}`);
		const ix = this.fieldIndex;
		const id = ix.id === undefined ? String(this.rowsSeen) : f[ix.id].trim();
		if (id === '') return this.reject(line, 'empty id');
		const prior = this.seenIds.get(id);
		if (prior !== undefined) return this.reject(line, `duplicate id "${id}" (first on line ${prior})`);
		let ra = parseNumber(f[ix.ra!]);
		const dec = parseNumber(f[ix.dec!]);
		const d = parseNumber(f[ix.distance!]);
		if (!Number.isFinite(ra) || ra < 0 || ra > 360) return this.reject(line, `ra "${f[ix.ra!]}" is not a number in [0, 360]`);
		if (ra === 360) ra = 0;
		if (!Number.isFinite(dec) || dec < -90 || dec > 90) return this.reject(line, `dec "${f[ix.dec!]}" is not a number in [-90, 90]`);
		if (!Number.isFinite(d) || d <= 0 || d > this.options.maxDistanceMpc) {
			return this.reject(line, `distance "${f[ix.distance!]}" is not a number in (0, ${this.options.maxDistanceMpc}] Mpc`);
		}
		let err = 0;
		if (ix.distance_err !== undefined && f[ix.distance_err].trim() !== '') {
			err = parseNumber(f[ix.distance_err]);
			if (!Number.isFinite(err) || err < 0) return this.reject(line, `distance_err "${f[ix.distance_err]}" is not a non-negative number`);
		}
		const magAt = (k: CatalogField): number | null => {
			const j = ix[k];
			if (j === undefined) return null;
			const v = parseNumber(f[j]);
			return Number.isFinite(v) ? v : NaN;
		};
		// Absolute B magnitude, from the column or from the apparent one and the distance.
		let mB = magAt('b_abs');
		if (mB === null) {
			const app = magAt('b_app');
			if (app !== null) mB = app - 5 * Math.log10(d) - 25;
		}
		if (mB !== null && !Number.isFinite(mB) && this.weightSource === 'b') return this.reject(line, 'B magnitude is not a number');
		const lumB = mB !== null && Number.isFinite(mB) ? 10 ** (-0.4 * (mB - SUN_ABS_MAG_B)) / 1e10 : NaN;
		let w: number;
		switch (this.weightSource) {
			case 'weight': {
				w = parseNumber(f[ix.weight!]);
				if (!Number.isFinite(w) || w < 0) return this.reject(line, `weight "${f[ix.weight!]}" is not a non-negative number`);
				break;
			}
			case 'b':
				w = lumB;
				break;
			case 'k': {
				let mK = magAt('k_abs');
				if (mK === null) mK = magAt('k_app')! - 5 * Math.log10(d) - 25;
				if (!Number.isFinite(mK)) return this.reject(line, 'K magnitude is not a number');
				w = 10 ** (-0.4 * (mK - SUN_ABS_MAG_K)) / 1e10;
				break;
			}
			case 'mass': {
				const m = parseNumber(f[ix.mass!]);
				if (!Number.isFinite(m) || m < 0) return this.reject(line, `mass "${f[ix.mass!]}" is not a non-negative number`);
				w = m / 1e10;
				break;
			}
			default:
				w = 1;
		}
		this.seenIds.set(id, line);
		this.ids.push(id);
		this.ra.push(ra);
		this.dec.push(dec);
		this.dist.push(d);
		this.distErr.push(err);
		this.weight.push(w);
		this.lumB.push(lumB);
	}

	private setHeader(names: string[], line: number): void {
		const lower = names.map((n) => n.toLowerCase());
		const cols = this.options.columns;
		for (const field of CATALOG_FIELDS) {
			const wanted = cols[field];
			const j = lower.indexOf((wanted ?? field).toLowerCase());
			if (j >= 0) {
				this.fieldIndex[field] = j;
				this.mapping[field] = names[j];
			} else if (wanted !== undefined) {
				this.fatal = `line ${line}: column "${wanted}" (mapped to ${field}) is not in the header`;
				return;
			}
		}
		const missing = (['ra', 'dec', 'distance'] as const).filter((k) => this.fieldIndex[k] === undefined);
		if (missing.length) {
			this.fatal = `line ${line}: header lacks ${missing.join(', ')} (found: ${names.join(', ')}); map them with columns`;
			return;
		}
		const ix = this.fieldIndex;
		// The most direct proxy present wins.
		this.weightSource =
			ix.weight !== undefined ? 'weight' : ix.b_abs !== undefined || ix.b_app !== undefined ? 'b' : ix.k_abs !== undefined || ix.k_app !== undefined ? 'k' : ix.mass !== undefined ? 'mass' : 'none';
		this.header = names;
	}

	/** The outcome, once every record was handed over. */
	finish(): CatalogCsvResult {
		if (!this.fatal && this.header === null) this.fatal = 'no header line';
		const rejected = { count: this.rejectedCount, rows: this.rejectedRows };
		const base = { fatal: this.fatal, rowsSeen: this.rowsSeen, rejected, mapping: this.mapping };
		if (this.fatal) return { ...base, ok: false, catalog: null };
		if (this.rejectedCount > 0 && !this.options.skipInvalid) return { ...base, ok: false, catalog: null };
		const lumB = this.lumB.toArray();
		const anyB = lumB.some((v) => !Number.isNaN(v));
		return {
			...base,
			ok: true,
			catalog: {
				size: this.ids.length,
				id: this.ids,
				raDeg: this.ra.toArray(),
				decDeg: this.dec.toArray(),
				distanceMpc: this.dist.toArray(),
				distanceErrMpc: this.distErr.toArray(),
				weight: this.weight.toArray(),
				luminosityB10: anyB ? lumB : null,
				weightSource: this.weightSource
			}
		};
	}
}

/** Parse a whole catalogue held in memory, given as one string or as pieces of it. */
export function parseCatalogCsv(input: string | Iterable<string>, options: CatalogCsvOptions = {}): CatalogCsvResult {
	const reader = new CatalogCsvParser(options);
	const prelude = new Prelude();
	const text = prelude.push(typeof input === 'string' ? input : [...input].join(''));
	const { records, error } = readCsv(text);
	for (const r of records) reader.record(r.cells, r.line + prelude.skipped);
	if (error) reader.unreadable({ ...error, line: error.line + prelude.skipped });
	return reader.finish();
}

/** What `parseCatalogCsvStream` says after each chunk it has read. */
export interface CatalogStreamProgress {
	/** Characters of text read so far. */
	chars: number;
}

/**
 * Parse a catalogue arriving in chunks of text, streamed through csv-parse: memory holds the chunk
 * in hand and the columnar arrays, not the file, and the event loop gets a turn between chunks.
 * A source that throws ends the parse with `fatal` "the upload was interrupted: …".
 */
export async function parseCatalogCsvStream(
	chunks: AsyncIterable<string> | Iterable<string>,
	options: CatalogCsvOptions & { onChunk?: (p: CatalogStreamProgress) => void } = {}
): Promise<CatalogCsvResult> {
	const { onChunk, ...parserOptions } = options;
	const reader = new CatalogCsvParser(parserOptions);
	const prelude = new Prelude();
	let chars = 0;
	async function* text(): AsyncGenerator<string> {
		for await (const chunk of chunks) {
			chars += chunk.length;
			const out = prelude.push(chunk);
			if (out) yield out;
			onChunk?.({ chars });
		}
		prelude.finish();
	}
	try {
		const error = await streamCsv(text(), (r) => reader.record(r.cells, r.line + prelude.skipped));
		if (error) reader.unreadable({ ...error, line: error.line + prelude.skipped });
	} catch (e) {
		reader.abort(`the upload was interrupted: ${(e as Error).message}`);
	}
	return reader.finish();
}

/** `id=NAME,ra=RAJ2000` → a column mapping; throws on unknown fields or bad pairs. */
export function parseColumnMapping(spec: string): Partial<Record<CatalogField, string>> {
	const out: Partial<Record<CatalogField, string>> = {};
	for (const part of spec.split(',')) {
		if (part.trim() === '') continue;
		const eq = part.indexOf('=');
		const key = part.slice(0, eq).trim();
		const value = part.slice(eq + 1).trim();
		if (eq <= 0 || value === '') throw new RangeError(`column mapping "${part}" is not FIELD=HEADER`);
		if (!(CATALOG_FIELDS as readonly string[]).includes(key)) throw new RangeError(`unknown catalogue field "${key}" (known: ${CATALOG_FIELDS.join(', ')})`);
		out[key as CatalogField] = value;
	}
	return out;
}
