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
import { readCsvPart } from '../csv-read.ts';
import { CATALOG_RECORD_MAX_BYTES } from '../limits.ts';

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

function parseNumber(s: string): number {
	const t = s.trim();
	return t === '' ? NaN : Number(t);
}

/**
 * Where reading a catalogue stands between two parts of its file: plain data (and one small byte
 * array), so that each part can be read by any thread of the work pool. Made by
 * `catalogPartState`, replaced by every `readCatalogPart`.
 */
export interface CatalogPartState {
	columns: Partial<Record<CatalogField, string>>;
	/** The mapping is the whole mapping: header columns named like a field but not mapped are ignored. */
	onlyMapped: boolean;
	maxDistanceMpc: number;
	maxRows: number;
	maxRecordBytes: number;
	/** The byte-order mark was looked for. */
	bomChecked: boolean;
	/** The lines before the header (blank, `#` comments) are behind. */
	preludeDone: boolean;
	/** Physical lines before `carry`. */
	lineBase: number;
	/** The start of a record not complete yet, read again in front of the next part. */
	carry: Uint8Array;
	header: string[] | null;
	fieldIndex: Partial<Record<CatalogField, number>>;
	weightSource: WeightSource;
	mapping: Partial<Record<CatalogField, string>>;
	fatal: string | null;
	rowsSeen: number;
	/** Nothing more is read: the end of the file, a fatal problem or quoting that cannot be read past. */
	stopped: boolean;
}

/** A row's fate in a part: kept (unless its id is a duplicate), refused before its id was known, or refused for a value. */
export const ROW_OK = 0;
export const ROW_REFUSED = 1;
export const ROW_BAD_VALUE = 2;

/**
 * The rows of one part, in file order, before the duplicate-id check (which needs every id seen
 * so far; `CatalogRowChecker` makes it on the thread that keeps them). Columns are NaN for
 * refused rows; `reason` holds one entry per row that is not ROW_OK, in order.
 */
export interface CatalogPartRows {
	size: number;
	kind: Uint8Array;
	line: Float64Array;
	/** '' for ROW_REFUSED rows. */
	id: string[];
	reason: string[];
	raDeg: Float64Array;
	decDeg: Float64Array;
	distanceMpc: Float64Array;
	distanceErrMpc: Float64Array;
	weight: Float64Array;
	/** B luminosity in 10^10 L_B,⊙; NaN when the row has no B magnitude. */
	luminosityB10: Float64Array;
}

/** The reading state before the first part of a file. */
export function catalogPartState(options: CatalogCsvOptions & { onlyMapped?: boolean; maxRecordBytes?: number } = {}): CatalogPartState {
	const columns = options.columns ?? {};
	for (const k of Object.keys(columns)) {
		if (!(CATALOG_FIELDS as readonly string[]).includes(k)) throw new RangeError(`unknown catalogue field "${k}" (known: ${CATALOG_FIELDS.join(', ')})`);
	}
	return {
		columns,
		onlyMapped: options.onlyMapped ?? false,
		maxDistanceMpc: options.maxDistanceMpc ?? 2000,
		maxRows: options.maxRows ?? 5_000_000,
		maxRecordBytes: options.maxRecordBytes ?? CATALOG_RECORD_MAX_BYTES,
		bomChecked: false,
		preludeDone: false,
		lineBase: 0,
		carry: new Uint8Array(0),
		header: null,
		fieldIndex: {},
		weightSource: 'none',
		mapping: {},
		fatal: null,
		rowsSeen: 0,
		stopped: false
	};
}

function setHeader(st: CatalogPartState, names: string[], line: number): void {
	const lower = names.map((n) => n.toLowerCase());
	for (const field of CATALOG_FIELDS) {
		const wanted = st.columns[field];
		if (wanted === undefined && st.onlyMapped) continue;
		const j = lower.indexOf((wanted ?? field).toLowerCase());
		if (j >= 0) {
			st.fieldIndex[field] = j;
			st.mapping[field] = names[j];
		} else if (wanted !== undefined) {
			st.fatal = `line ${line}: column "${wanted}" (mapped to ${field}) is not in the header`;
			return;
		}
	}
	const missing = (['ra', 'dec', 'distance'] as const).filter((k) => st.fieldIndex[k] === undefined);
	if (missing.length) {
		st.fatal = `line ${line}: header lacks ${missing.join(', ')} (found: ${names.join(', ')}); map them with columns`;
		return;
	}
	const ix = st.fieldIndex;
	// The most direct proxy present wins.
	st.weightSource =
		ix.weight !== undefined ? 'weight' : ix.b_abs !== undefined || ix.b_app !== undefined ? 'b' : ix.k_abs !== undefined || ix.k_app !== undefined ? 'k' : ix.mass !== undefined ? 'mass' : 'none';
	st.header = names;
}

/** A row's values, or why they are refused (the checks after the duplicate-id one). */
function rowValues(st: CatalogPartState, f: string[]): { ra: number; dec: number; d: number; err: number; w: number; lumB: number } | string {
	const ix = st.fieldIndex;
	let ra = parseNumber(f[ix.ra!]);
	const dec = parseNumber(f[ix.dec!]);
	const d = parseNumber(f[ix.distance!]);
	if (!Number.isFinite(ra) || ra < 0 || ra > 360) return `ra "${f[ix.ra!]}" is not a number in [0, 360]`;
	if (ra === 360) ra = 0;
	if (!Number.isFinite(dec) || dec < -90 || dec > 90) return `dec "${f[ix.dec!]}" is not a number in [-90, 90]`;
	if (!Number.isFinite(d) || d <= 0 || d > st.maxDistanceMpc) return `distance "${f[ix.distance!]}" is not a number in (0, ${st.maxDistanceMpc}] Mpc`;
	let err = 0;
	if (ix.distance_err !== undefined && f[ix.distance_err].trim() !== '') {
		err = parseNumber(f[ix.distance_err]);
		if (!Number.isFinite(err) || err < 0) return `distance_err "${f[ix.distance_err]}" is not a non-negative number`;
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
	if (mB !== null && !Number.isFinite(mB) && st.weightSource === 'b') return 'B magnitude is not a number';
	const lumB = mB !== null && Number.isFinite(mB) ? 10 ** (-0.4 * (mB - SUN_ABS_MAG_B)) / 1e10 : NaN;
	let w: number;
	switch (st.weightSource) {
		case 'weight': {
			w = parseNumber(f[ix.weight!]);
			if (!Number.isFinite(w) || w < 0) return `weight "${f[ix.weight!]}" is not a non-negative number`;
			break;
		}
		case 'b':
			w = lumB;
			break;
		case 'k': {
			let mK = magAt('k_abs');
			if (mK === null) mK = magAt('k_app')! - 5 * Math.log10(d) - 25;
			if (!Number.isFinite(mK)) return 'K magnitude is not a number';
			w = 10 ** (-0.4 * (mK - SUN_ABS_MAG_K)) / 1e10;
			break;
		}
		case 'mass': {
			const m = parseNumber(f[ix.mass!]);
			if (!Number.isFinite(m) || m < 0) return `mass "${f[ix.mass!]}" is not a non-negative number`;
			w = m / 1e10;
			break;
		}
		default:
			w = 1;
	}
	return { ra, dec, d, err, w, lumB };
}

function newlinesIn(bytes: Uint8Array): number {
	let n = 0;
	for (let i = bytes.indexOf(0x0a); i >= 0; i = bytes.indexOf(0x0a, i + 1)) n++;
	return n;
}

const utf8 = new TextDecoder('utf-8');

/**
 * Read one part of a catalogue file (UTF-8 bytes, cut anywhere) after `state`: the lines before
 * the header, the header, then every complete record, checked except for duplicate ids. With
 * `final` the part ends the file. The part's bytes are not kept; the returned state carries the
 * record still incomplete. Pure, and cheap to post between threads (the work pool's
 * `readCatalogPart` task runs it).
 */
export function readCatalogPart(state: CatalogPartState, bytes: Uint8Array, final: boolean): { state: CatalogPartState; rows: CatalogPartRows } {
	const st: CatalogPartState = { ...state, fieldIndex: { ...state.fieldIndex }, mapping: { ...state.mapping } };
	let buf = bytes;
	if (st.carry.length) {
		buf = new Uint8Array(st.carry.length + bytes.length);
		buf.set(st.carry);
		buf.set(bytes, st.carry.length);
	}
	st.carry = new Uint8Array(0);
	const out = { kind: [] as number[], line: [] as number[], id: [] as string[], reason: [] as string[], values: [] as number[] };
	const done = () => ({ state: st, rows: partRows(out) });
	if (st.stopped || st.fatal) {
		st.stopped = true;
		return done();
	}
	let at = 0;
	if (!st.bomChecked) {
		if (buf.length < 3 && !final) {
			st.carry = buf.slice();
			return done();
		}
		if (buf[0] === 0xef && buf[1] === 0xbb && buf[2] === 0xbf) at = 3;
		st.bomChecked = true;
	}
	// Lines before the header: blank ones and `#` comments, set aside before csv-parse sees the text
	// (so a quote in a comment is harmless), counted so that line numbers stay those of the file.
	while (!st.preludeDone) {
		const nl = buf.indexOf(0x0a, at);
		const line = utf8.decode(buf.subarray(at, nl < 0 ? buf.length : nl));
		const aside = line.trim() === '' || line.startsWith('#');
		if (nl < 0) {
			if (!final) {
				st.carry = buf.slice(at);
				return done();
			}
			if (aside) at = buf.length;
			st.preludeDone = true;
			break;
		}
		if (!aside) {
			st.preludeDone = true;
			break;
		}
		st.lineBase++;
		at = nl + 1;
	}
	const text = buf.subarray(at);
	const { records, consumed, error } = readCsvPart(text, final);
	const base = st.lineBase;
	const refuse = (line: number, reason: string) => {
		out.kind.push(ROW_REFUSED);
		out.line.push(line);
		out.id.push('');
		out.reason.push(reason);
		out.values.push(NaN, NaN, NaN, NaN, NaN, NaN);
	};
	for (const r of records) {
		if (st.fatal) break;
		const f = r.cells;
		const line = r.line + base;
		if (st.header === null) {
			setHeader(st, f, line);
			continue;
		}
		if (f.length === 1 && f[0] === '') continue;
		st.rowsSeen++;
		if (st.rowsSeen > st.maxRows) {
			st.fatal = `more than ${st.maxRows} rows`;
			break;
		}
		if (f.length !== st.header.length) {
			refuse(line, `expected ${st.header.length} fields, found ${f.length}`);
			continue;
		}
		const id = st.fieldIndex.id === undefined ? String(st.rowsSeen) : f[st.fieldIndex.id].trim();
		if (id === '') {
			refuse(line, 'empty id');
			continue;
		}
		const v = rowValues(st, f);
		out.line.push(line);
		out.id.push(id);
		if (typeof v === 'string') {
			out.kind.push(ROW_BAD_VALUE);
			out.reason.push(v);
			out.values.push(NaN, NaN, NaN, NaN, NaN, NaN);
		} else {
			out.kind.push(ROW_OK);
			out.values.push(v.ra, v.dec, v.d, v.err, v.w, v.lumB);
		}
	}
	if (!st.fatal && error) {
		const line = error.line + base;
		if (st.header === null) st.fatal = `line ${line}: malformed header (unbalanced quotes)`;
		else if (error.kind === 'unclosed-quote') refuse(line, 'unterminated quoted field');
		else st.fatal = `line ${line}: malformed quoting (a quoted field has text after its closing quote); the rows after it were not read`;
		st.stopped = true;
	}
	st.lineBase += newlinesIn(text.subarray(0, consumed));
	if (!st.stopped && !st.fatal && consumed < text.length) {
		st.carry = text.slice(consumed);
		if (st.carry.length > st.maxRecordBytes) {
			st.fatal = `line ${st.lineBase + 1}: a record longer than ${Math.round(st.maxRecordBytes / 1024)} kB (a quote left open?); the rows after it were not read`;
			st.carry = new Uint8Array(0);
		}
	}
	if (final || st.fatal) st.stopped = true;
	return done();
}

function partRows(out: { kind: number[]; line: number[]; id: string[]; reason: string[]; values: number[] }): CatalogPartRows {
	const n = out.kind.length;
	const col = (k: number) => {
		const a = new Float64Array(n);
		for (let i = 0; i < n; i++) a[i] = out.values[i * 6 + k];
		return a;
	};
	return {
		size: n,
		kind: Uint8Array.from(out.kind),
		line: Float64Array.from(out.line),
		id: out.id,
		reason: out.reason,
		raDeg: col(0),
		decDeg: col(1),
		distanceMpc: col(2),
		distanceErrMpc: col(3),
		weight: col(4),
		luminosityB10: col(5)
	};
}

/**
 * The duplicate-id check and the report of refused rows, part after part, on the thread that
 * keeps every id seen so far. `take` answers the rows of a part to keep (indexes into it).
 * The checks run in the order a row is read: field count, empty id, duplicate id, values.
 */
export class CatalogRowChecker {
	private readonly seen = new Map<string, number>();
	rejectedCount = 0;
	readonly rejectedRows: RejectedRow[] = [];
	constructor(private readonly maxReported: number) {}

	reject(line: number, reason: string): void {
		this.rejectedCount++;
		if (this.rejectedRows.length < this.maxReported) this.rejectedRows.push({ line, reason });
	}

	/** Check a whole part: the indexes of the rows to store, in order. */
	take(rows: CatalogPartRows): number[] {
		const kept: number[] = [];
		this.takeRange(rows, 0, rows.size, { reason: 0 }, kept);
		return kept;
	}

	/**
	 * Check rows [from, to) of a part, adding the indexes to store to `kept`. A part may be checked
	 * in several calls, in order; `cursor.reason` carries the place in `rows.reason` between them.
	 */
	takeRange(rows: CatalogPartRows, from: number, to: number, cursor: { reason: number }, kept: number[]): void {
		for (let i = from; i < to; i++) {
			const kind = rows.kind[i];
			const line = rows.line[i];
			if (kind === ROW_REFUSED) {
				this.reject(line, rows.reason[cursor.reason++]);
				continue;
			}
			const id = rows.id[i];
			const prior = this.seen.get(id);
			const why = kind === ROW_BAD_VALUE ? rows.reason[cursor.reason++] : null;
			if (prior !== undefined) this.reject(line, `duplicate id "${id}" (first on line ${prior})`);
			else if (why !== null) this.reject(line, why);
			else {
				this.seen.set(id, line);
				kept.push(i);
			}
		}
	}
}

/** M_B of a B luminosity in 10^10 L_B,⊙ (the inverse of the parser's conversion); null without one. */
export function absoluteMagB(luminosityB10: number): number | null {
	return luminosityB10 > 0 ? SUN_ABS_MAG_B - 2.5 * Math.log10(luminosityB10 * 1e10) : null;
}

/** UTF-8 bytes of text chunks, a surrogate pair never cut between two of them. */
export class Utf8Chunks {
	private held = '';
	private readonly encoder = new TextEncoder();
	push(chunk: string): Uint8Array {
		let text = this.held + chunk;
		this.held = '';
		const last = text.charCodeAt(text.length - 1);
		if (last >= 0xd800 && last <= 0xdbff) {
			this.held = text.slice(-1);
			text = text.slice(0, -1);
		}
		return this.encoder.encode(text);
	}
	finish(): Uint8Array {
		const rest = this.held;
		this.held = '';
		return this.encoder.encode(rest);
	}
}

/**
 * Whole-file reading on the calling thread: `push` the file's parts (text or UTF-8 bytes), then
 * `finish()`. Chunks may split lines, CRLF pairs and quoted fields anywhere. (The server reads
 * parts on the work pool instead, with the same `readCatalogPart` and `CatalogRowChecker`.)
 */
export class CatalogCsvParser {
	private state: CatalogPartState;
	private readonly skipInvalid: boolean;
	private readonly checker: CatalogRowChecker;
	private readonly encoder = new Utf8Chunks();
	private readonly ids: string[] = [];
	private readonly ra = new GrowableF64();
	private readonly dec = new GrowableF64();
	private readonly dist = new GrowableF64();
	private readonly distErr = new GrowableF64();
	private readonly weight = new GrowableF64();
	private readonly lumB = new GrowableF64();

	constructor(options: CatalogCsvOptions = {}) {
		this.state = catalogPartState(options);
		this.skipInvalid = options.skipInvalid ?? false;
		this.checker = new CatalogRowChecker(options.maxReported ?? 100);
	}

	/** Lines read so far. */
	get lines(): number {
		return this.state.lineBase;
	}

	push(chunk: string | Uint8Array, final = false): void {
		const bytes = typeof chunk === 'string' ? this.encoder.push(chunk) : chunk;
		if (final) {
			const rest = this.encoder.finish();
			this.read(rest.length ? concatBytes([bytes, rest]) : bytes, true);
		} else this.read(bytes, false);
	}

	private read(bytes: Uint8Array, final: boolean): void {
		const { state, rows } = readCatalogPart(this.state, bytes, final);
		this.state = state;
		for (const i of this.checker.take(rows)) {
			this.ids.push(rows.id[i]);
			this.ra.push(rows.raDeg[i]);
			this.dec.push(rows.decDeg[i]);
			this.dist.push(rows.distanceMpc[i]);
			this.distErr.push(rows.distanceErrMpc[i]);
			this.weight.push(rows.weight[i]);
			this.lumB.push(rows.luminosityB10[i]);
		}
	}

	/** The end of the upload, cut short with this reason (too large, interrupted). */
	abort(reason: string): void {
		this.state = { ...this.state, fatal: this.state.fatal ?? reason, stopped: true };
	}

	/** The outcome, once every part was handed over. */
	finish(): CatalogCsvResult {
		if (!this.state.stopped) this.push(new Uint8Array(0), true);
		const st = this.state;
		const fatal = st.fatal ?? (st.header === null ? 'no header line' : null);
		const rejected = { count: this.checker.rejectedCount, rows: this.checker.rejectedRows };
		const base = { fatal, rowsSeen: st.rowsSeen, rejected, mapping: st.mapping };
		if (fatal) return { ...base, ok: false, catalog: null };
		if (rejected.count > 0 && !this.skipInvalid) return { ...base, ok: false, catalog: null };
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
				weightSource: st.weightSource
			}
		};
	}
}

/** One array of the given pieces. */
export function concatBytes(pieces: Uint8Array[]): Uint8Array<ArrayBuffer> {
	let n = 0;
	for (const p of pieces) n += p.length;
	const out = new Uint8Array(n);
	let at = 0;
	for (const p of pieces) {
		out.set(p, at);
		at += p.length;
	}
	return out;
}

/** Parse a whole catalogue held in memory, given as one string or as pieces of it. */
export function parseCatalogCsv(input: string | Iterable<string>, options: CatalogCsvOptions = {}): CatalogCsvResult {
	const reader = new CatalogCsvParser(options);
	reader.push(typeof input === 'string' ? input : [...input].join(''), true);
	return reader.finish();
}

/** What `parseCatalogCsvStream` says after each chunk it has read. */
export interface CatalogStreamProgress {
	/** Characters of text read so far. */
	chars: number;
}

/** Bytes read at once by `parseCatalogCsvStream` before the event loop gets a turn. */
const STREAM_PART_BYTES = 256 * 1024;

/**
 * Parse a catalogue arriving in chunks of text on the calling thread: memory holds a part of the
 * file (≈ 256 kB) and the columnar arrays, not the file, and the event loop gets a turn between
 * parts. A source that throws ends the parse with `fatal` "the upload was interrupted: …".
 * (For the CLI, scripts and tests; the server reads uploads on the work pool, `catalogs.ts`.)
 */
export async function parseCatalogCsvStream(
	chunks: AsyncIterable<string> | Iterable<string>,
	options: CatalogCsvOptions & { onChunk?: (p: CatalogStreamProgress) => void } = {}
): Promise<CatalogCsvResult> {
	const { onChunk, ...parserOptions } = options;
	const reader = new CatalogCsvParser(parserOptions);
	let chars = 0;
	let pending: string[] = [];
	let pendingChars = 0;
	const flush = () => {
		reader.push(pending.join(''));
		pending = [];
		pendingChars = 0;
	};
	try {
		for await (const chunk of chunks) {
			chars += chunk.length;
			pending.push(chunk);
			pendingChars += chunk.length;
			if (pendingChars >= STREAM_PART_BYTES) {
				flush();
				await new Promise<void>((resolve) => setImmediate(resolve));
			}
			onChunk?.({ chars });
		}
		reader.push(pending.join(''), true);
	} catch (e) {
		flush();
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
