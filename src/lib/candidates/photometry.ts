/**
 * Photometry of a transient candidate: one measurement per row, either a detection (magnitude and
 * its error) or an upper limit (the faintest magnitude that would have been seen, nothing found).
 *
 * The upload format is CSV with the header `time,filter,mag,mag_err,limit` (columns in any order,
 * names case-insensitive). The same field names are used for JSON rows, and both go through one
 * validator, `checkPhotometryRow`, so the form, the CSV upload and the API refuse the same things
 * with the same words. All or nothing: one bad row refuses the whole file, with every bad line listed.
 * Magnitudes are taken as given (AB or Vega is the observer's business); times are ISO 8601 with an
 * explicit zone (Z or ±hh:mm) and are stored as UTC.
 */
import { readCsv } from '../csv-read.ts';

/** The CSV header fields, in the documented order. */
export const PHOTOMETRY_COLUMNS = ['time', 'filter', 'mag', 'mag_err', 'limit'] as const;
export type PhotometryColumn = (typeof PHOTOMETRY_COLUMNS)[number];

/** Magnitude bounds, the same as a reported candidate's (5–30); errors up to 5 mag. */
export const MAG_MIN = 5;
export const MAG_MAX = 30;
export const MAG_ERR_MAX = 5;
export const FILTER_MAX_CHARS = 20;
/** Refuse files with more rows than this; a light curve has tens to hundreds. */
export const MAX_PHOTOMETRY_ROWS = 20_000;

/** One measurement. A detection has `mag` and `magErr`; an upper limit has `limitMag` and no `mag`. */
export interface PhotometryPoint {
	/** ISO 8601 UTC, normalised (`2026-12-02T03:04:05.000Z`). */
	time: string;
	/** Milliseconds since 1970-01-01T00:00:00Z. */
	timeMs: number;
	filter: string;
	mag: number | null;
	magErr: number | null;
	limitMag: number | null;
}

/** One row as it arrives: CSV cells (strings) or JSON values; '' / null / undefined mean "absent". */
export type PhotometryRowInput = Partial<Record<PhotometryColumn, string | number | null | undefined>>;

export type RowCheck = { ok: true; point: PhotometryPoint } | { ok: false; errors: string[] };

export interface PhotometryLineError {
	/** 1-based line of the file (the header is line 1). */
	line: number;
	message: string;
}

export type PhotometryParse = { ok: true; points: PhotometryPoint[] } | { ok: false; errors: PhotometryLineError[] };

export class PhotometryError extends Error {
	readonly errors: PhotometryLineError[];
	constructor(errors: PhotometryLineError[]) {
		const first = errors[0];
		super(
			errors.length === 1
				? `line ${first.line}: ${first.message}`
				: `${errors.length} problems; the first, line ${first.line}: ${first.message}`
		);
		this.name = 'PhotometryError';
		this.errors = errors;
	}
}

const NUMBER = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;
// Date, time to minutes at least, optional seconds and fraction, and a zone: ISO 8601 extended format.
const ISO_TIME = /^(\d{4})-(\d{2})-(\d{2})[T ](\d{2}):(\d{2})(?::(\d{2})(?:\.(\d{1,9}))?)?(Z|[+-]\d{2}:?\d{2})$/;

function absent(v: unknown): boolean {
	return v === undefined || v === null || (typeof v === 'string' && v.trim() === '');
}

/** A number from a cell or JSON value; undefined when absent, null when present but not a number. */
function numberOf(v: unknown): number | null | undefined {
	if (absent(v)) return undefined;
	if (typeof v === 'number') return Number.isFinite(v) ? v : null;
	if (typeof v === 'string' && NUMBER.test(v.trim())) return Number(v.trim());
	return null;
}

function shown(v: unknown): string {
	const s = String(v).trim();
	return s.length > 30 ? `${s.slice(0, 27)}…` : s;
}

/**
 * Parse an ISO 8601 time with an explicit zone into milliseconds since the epoch (UTC), or null.
 * Calendar fields are checked (no 31 April, no hour 24), which `Date.parse` alone does not do.
 */
export function parseUtcTime(text: string): number | null {
	const m = ISO_TIME.exec(text.trim());
	if (!m) return null;
	const [, y, mo, d, h, mi, s = '0', frac = '0', zone] = m;
	const year = Number(y);
	const month = Number(mo);
	const day = Number(d);
	if (month < 1 || month > 12 || day < 1 || Number(h) > 23 || Number(mi) > 59 || Number(s) > 59) return null;
	const daysInMonth = new Date(Date.UTC(year, month, 0)).getUTCDate();
	if (day > daysInMonth) return null;
	let ms = Date.UTC(year, month - 1, day, Number(h), Number(mi), Number(s)) + Math.round(Number(`0.${frac}`) * 1000);
	if (zone !== 'Z') {
		const sign = zone[0] === '-' ? -1 : 1;
		const digits = zone.slice(1).replace(':', '');
		const offsetMin = Number(digits.slice(0, 2)) * 60 + Number(digits.slice(2));
		if (Number(digits.slice(0, 2)) > 23 || Number(digits.slice(2)) > 59) return null;
		ms -= sign * offsetMin * 60_000;
	}
	return ms;
}

function checkMagnitude(what: string, v: number | null | undefined, raw: unknown, errors: string[]): void {
	if (v === null) errors.push(`${what} "${shown(raw)}" is not a number`);
	else if (v !== undefined && (v < MAG_MIN || v > MAG_MAX)) errors.push(`${what} ${v} is outside ${MAG_MIN}–${MAG_MAX}`);
}

/**
 * Check one photometry row (CSV cells or a JSON object with the CSV's field names) and build the
 * point. Errors are short phrases in plain words, without the line number (the caller adds it).
 */
export function checkPhotometryRow(row: PhotometryRowInput): RowCheck {
	const errors: string[] = [];
	let timeMs: number | null = null;
	if (absent(row.time)) errors.push('time is missing');
	else if (typeof row.time !== 'string') errors.push('time must be text such as 2026-12-02T03:04:05Z');
	else {
		timeMs = parseUtcTime(row.time);
		if (timeMs === null) {
			errors.push(
				/^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(:\d{2}(\.\d+)?)?$/.test(row.time.trim())
					? `time "${shown(row.time)}" has no time zone; add Z for UTC (e.g. 2026-12-02T03:04:05Z)`
					: `time "${shown(row.time)}" is not an ISO 8601 time such as 2026-12-02T03:04:05Z`
			);
		}
	}
	const filter = typeof row.filter === 'string' ? row.filter.trim() : typeof row.filter === 'number' ? String(row.filter) : '';
	if (filter === '') errors.push('filter is missing');
	else if (filter.length > FILTER_MAX_CHARS) errors.push(`filter must be at most ${FILTER_MAX_CHARS} characters`);

	const mag = numberOf(row.mag);
	const magErr = numberOf(row.mag_err);
	const limit = numberOf(row.limit);
	checkMagnitude('magnitude', mag, row.mag, errors);
	checkMagnitude('limit', limit, row.limit, errors);
	if (magErr === null) errors.push(`magnitude error "${shown(row.mag_err)}" is not a number`);
	else if (magErr !== undefined && !(magErr > 0)) errors.push('magnitude error must be greater than 0');
	else if (magErr !== undefined && magErr > MAG_ERR_MAX) errors.push(`magnitude error must be at most ${MAG_ERR_MAX}`);
	if (typeof mag === 'number' && magErr === undefined) errors.push('a magnitude needs its error (mag_err)');
	if (mag === undefined && typeof magErr === 'number') errors.push('a magnitude error without a magnitude: leave mag_err empty for an upper limit');
	if (mag === undefined && limit === undefined) errors.push('needs a magnitude (a detection) or a limit (an upper limit)');

	if (errors.length > 0 || timeMs === null) return { ok: false, errors };
	return {
		ok: true,
		point: {
			time: new Date(timeMs).toISOString(),
			timeMs,
			filter,
			mag: mag ?? null,
			magErr: magErr ?? null,
			limitMag: limit ?? null
		}
	};
}

/** `#` starts a comment line (leading spaces allowed). */
const isComment = (cells: string[]): boolean => cells[0].startsWith('#');

/**
 * Parse photometry CSV (header `time,filter,mag,mag_err,limit`, RFC 4180 quoting read by
 * csv-parse, `lib/csv-read.ts`). Blank lines and lines starting with `#` are skipped. Every problem
 * is reported with its line number; on any problem no points are returned.
 */
export function parsePhotometryCsv(text: string): PhotometryParse {
	const { records, error } = readCsv(text);
	const errors: PhotometryLineError[] = [];
	const rowsFrom = records.findIndex((r) => !isComment(r.cells) && !(r.cells.length === 1 && r.cells[0] === ''));
	if (rowsFrom < 0) {
		if (error) return { ok: false, errors: [{ line: error.line, message: 'the header has an unclosed quote' }] };
		return { ok: false, errors: [{ line: 1, message: 'the file is empty: expected the header time,filter,mag,mag_err,limit' }] };
	}
	const header = records[rowsFrom].cells;
	const headerLine = records[rowsFrom].line;
	const names = header.map((h) => h.toLowerCase());
	const index = new Map<PhotometryColumn, number>();
	names.forEach((n, k) => {
		if ((PHOTOMETRY_COLUMNS as readonly string[]).includes(n)) {
			if (index.has(n as PhotometryColumn)) errors.push({ line: headerLine, message: `column "${n}" appears twice` });
			index.set(n as PhotometryColumn, k);
		} else errors.push({ line: headerLine, message: `unknown column "${header[k]}" (expected ${PHOTOMETRY_COLUMNS.join(', ')})` });
	});
	const missing = PHOTOMETRY_COLUMNS.filter((c) => !index.has(c));
	if (missing.length > 0) errors.push({ line: headerLine, message: `the header lacks ${missing.join(', ')} (expected ${PHOTOMETRY_COLUMNS.join(',')})` });
	if (errors.length > 0) return { ok: false, errors };

	const points: PhotometryPoint[] = [];
	let rows = 0;
	for (const { line, cells } of records.slice(rowsFrom + 1)) {
		if (isComment(cells) || (cells.length === 1 && cells[0] === '')) continue;
		if (++rows > MAX_PHOTOMETRY_ROWS) {
			errors.push({ line, message: `more than ${MAX_PHOTOMETRY_ROWS} rows; split the file` });
			break;
		}
		if (cells.length !== header.length) {
			errors.push({ line, message: `has ${cells.length} cells but the header has ${header.length}` });
			continue;
		}
		const row: PhotometryRowInput = {};
		for (const [name, at] of index) row[name] = cells[at];
		const r = checkPhotometryRow(row);
		if (r.ok) points.push(r.point);
		else for (const message of r.errors) errors.push({ line, message });
	}
	// csv-parse cannot go on reliably past an unreadable record: it ends the list, and nothing is kept.
	if (error && rows <= MAX_PHOTOMETRY_ROWS)
		errors.push({ line: error.line, message: error.kind === 'unclosed-quote' ? 'a quote is left open' : 'a quoted cell has text after its closing quote (quote the whole cell); the lines after it were not read' });
	if (errors.length > 0) return { ok: false, errors };
	if (points.length === 0) return { ok: false, errors: [{ line: headerLine, message: 'the file has a header but no rows' }] };
	return { ok: true, points };
}

/**
 * The line of each data row of a photometry CSV, counted as the upload has always counted them
 * for the checks against the store: physical lines, the first that is not blank or a `#` comment
 * being the header.
 */
export function photometryDataLines(text: string): number[] {
	const lines: number[] = [];
	const all = text.replace(/^\uFEFF/, '').split(/\r?\n/);
	let header = false;
	all.forEach((l, k) => {
		if (l.trim() === '' || l.trimStart().startsWith('#')) return;
		if (!header) header = true;
		else lines.push(k + 1);
	});
	return lines;
}

/** An uploaded photometry CSV read whole (the work pool's task of the same name): the parse, and with its points their lines. */
export function readPhotometryUpload(text: string): { parse: PhotometryParse; lines: number[] } {
	const parse = parsePhotometryCsv(text);
	return { parse, lines: parse.ok ? photometryDataLines(text) : [] };
}

/** `parsePhotometryCsv` for callers that prefer an exception: throws PhotometryError listing every bad line. */
export function readPhotometryCsv(text: string): PhotometryPoint[] {
	const r = parsePhotometryCsv(text);
	if (!r.ok) throw new PhotometryError(r.errors);
	return r.points;
}
