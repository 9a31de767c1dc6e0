/**
 * Readers for a candidate's one-dimensional spectrum, from the file's bytes (no I/O). The format is
 * told by content, never by file name:
 *  - FITS (bytes begin with `SIMPLE  =`), gzip-compressed or not: the first HDU that holds a
 *    spectrum is used, either
 *      · a 1-D image (NAXIS = 1, or NAXIS > 1 with every axis after the first of length 1) with a
 *        linear wavelength axis: λ(p) = CRVAL1 + s·(p − CRPIX1) for 1-based pixel p, s = CD1_1, or
 *        CDELT1·PC1_1 (PC1_1 = 1 when absent), CRPIX1 = 0 when absent (Greisen & Calabretta 2002,
 *        A&A 395, 1061, "Representations of world coordinates in FITS", eqs. 1–3 and their
 *        defaults; from memory); units from CUNIT1 (or IRAF's WAT1_001 `units=`) and BUNIT; or
 *      · a binary table with a wavelength column and a flux column, optionally an error column,
 *        found by name (case-insensitive; see WAVELENGTH_NAMES, FLUX_NAMES, ERROR_NAMES), as one row
 *        per pixel or as array cells; an `ivar` (inverse variance) column gives error = 1/√ivar and a
 *        `var`/`variance` column error = √var; units from TUNITn.
 *  - anything else that is text: ASCII with two or three columns (wavelength, flux, error), separated
 *    by whitespace or commas. Lines starting with `#` are comments; one header line of names may come
 *    first (names in WAVELENGTH_NAMES etc. order the columns; `wavelength [Angstrom]` or
 *    `flux (erg/s/cm2/A)` give units). astropy's ECSV unit declarations in the comments are read, and
 *    a comment line of names just before the data serves as the header (astropy's commented header).
 *
 * Wavelengths must be finite and strictly monotonic; a decreasing spectrum is returned increasing.
 * Flux and error may be NaN (masked pixels, `nan` in text). Units are the file's own words, or null
 * when the file does not state them (no unit is assumed).
 */
import { FitsError, gunzipCapped, readBinTable, readFits, readImage, type FitsFile, type Hdu } from '../sky/fits.ts';

/** Largest spectrum file accepted, bytes (20 MiB; also the cap on a gzipped file's inflated size). */
export const DEFAULT_MAX_SPECTRUM_BYTES = 20 * 1024 * 1024;

export const WAVELENGTH_NAMES = ['wavelength', 'wave', 'lambda', 'wl', 'lam', 'wavelen'] as const;
export const FLUX_NAMES = ['flux', 'flam', 'fnu', 'f_lambda', 'f_nu', 'flux_density', 'spectrum'] as const;
export const ERROR_NAMES = ['error', 'err', 'flux_err', 'fluxerr', 'flux_error', 'e_flux', 'sigma', 'uncertainty', 'noise', 'stddev'] as const;
export const IVAR_NAMES = ['ivar', 'inverse_variance', 'invvar'] as const;
export const VARIANCE_NAMES = ['var', 'variance'] as const;

export type SpectrumFormat = 'ascii' | 'fits-table' | 'fits-image';

export interface Spectrum {
	/** Strictly increasing. */
	wavelength: Float64Array;
	flux: Float64Array;
	/** One-sigma flux errors, when the file has them. */
	error?: Float64Array;
	wavelengthUnit: string | null;
	fluxUnit: string | null;
	format: SpectrumFormat;
}

/** What the CLI and the pages show about a spectrum file. */
export interface SpectrumSummary {
	points: number;
	wavelengthMin: number;
	wavelengthMax: number;
	wavelengthUnit: string | null;
	fluxUnit: string | null;
	hasErrors: boolean;
}

export class SpectrumError extends Error {
	constructor(message: string) {
		super(message);
		this.name = 'SpectrumError';
	}
}

export interface ReadSpectrumOptions {
	/** Refuse files (and gzip contents) larger than this many bytes. Default DEFAULT_MAX_SPECTRUM_BYTES. */
	maxBytes?: number;
}

const MIB = 1024 * 1024;
const megabytes = (n: number) => `${(n / MIB).toFixed(n < MIB ? 3 : 1).replace(/\.?0+$/, '')} MB`;

/**
 * Read a spectrum from a file's bytes, telling FITS from text by content. Throws SpectrumError with
 * a one-line reason in plain words (empty file, over the size limit, not a spectrum, a bad value
 * with its line, a truncated FITS file, wavelengths out of order, …).
 */
export function readSpectrum(bytes: Uint8Array, options: ReadSpectrumOptions = {}): Spectrum {
	const maxBytes = options.maxBytes ?? DEFAULT_MAX_SPECTRUM_BYTES;
	const tooBig = fileSizeProblem(bytes.length, maxBytes);
	if (tooBig) throw new SpectrumError(tooBig);
	let data = bytes;
	if (bytes.length >= 2 && bytes[0] === 0x1f && bytes[1] === 0x8b) {
		try {
			data = gunzipCapped(bytes, maxBytes);
		} catch (e) {
			throw new SpectrumError(
				/past the limit/.test((e as Error).message)
					? `the gzip file unpacks to more than ${megabytes(maxBytes)}, over the limit`
					: 'the gzip file is damaged and cannot be unpacked'
			);
		}
		if (data.length === 0) throw new SpectrumError('the gzip file unpacks to nothing (0 bytes)');
	}
	if (startsWith(data, 'SIMPLE  =')) return readFitsSpectrum(data, maxBytes);
	let text: string;
	try {
		text = new TextDecoder('utf-8', { fatal: true }).decode(data);
	} catch {
		throw new SpectrumError('not a spectrum file: it is neither FITS nor text');
	}
	if (text.includes('\u0000')) throw new SpectrumError('not a spectrum file: it is neither FITS nor text');
	return readAsciiSpectrum(text);
}

/** Why a file of this size is refused (empty, or over the limit), or null; lets a caller refuse before reading it. */
export function fileSizeProblem(sizeBytes: number, maxBytes = DEFAULT_MAX_SPECTRUM_BYTES): string | null {
	if (sizeBytes === 0) return 'the file is empty (0 bytes)';
	if (sizeBytes > maxBytes) return `the file is ${megabytes(sizeBytes)}, over the limit of ${megabytes(maxBytes)}`;
	return null;
}

/** The numbers the CLI prints for a spectrum. */
export function summariseSpectrum(s: Spectrum): SpectrumSummary {
	return {
		points: s.wavelength.length,
		wavelengthMin: s.wavelength[0],
		wavelengthMax: s.wavelength[s.wavelength.length - 1],
		wavelengthUnit: s.wavelengthUnit,
		fluxUnit: s.fluxUnit,
		hasErrors: s.error !== undefined
	};
}

function startsWith(bytes: Uint8Array, text: string): boolean {
	if (bytes.length < text.length) return false;
	for (let i = 0; i < text.length; i++) if (bytes[i] !== text.charCodeAt(i)) return false;
	return true;
}

type Role = 'wavelength' | 'flux' | 'error' | 'ivar' | 'variance';

function roleOf(name: string): Role | null {
	const n = name.trim().toLowerCase();
	if ((WAVELENGTH_NAMES as readonly string[]).includes(n)) return 'wavelength';
	if ((FLUX_NAMES as readonly string[]).includes(n)) return 'flux';
	if ((ERROR_NAMES as readonly string[]).includes(n)) return 'error';
	if ((IVAR_NAMES as readonly string[]).includes(n)) return 'ivar';
	if ((VARIANCE_NAMES as readonly string[]).includes(n)) return 'variance';
	return null;
}

/** Errors from an error, inverse-variance or variance column (ivar ≤ 0 means "no information": NaN). */
function toErrors(values: Float64Array, role: Role): Float64Array {
	if (role === 'error') return values;
	const out = new Float64Array(values.length);
	for (let i = 0; i < values.length; i++) {
		const v = values[i];
		out[i] = role === 'ivar' ? (v > 0 ? 1 / Math.sqrt(v) : NaN) : v >= 0 ? Math.sqrt(v) : NaN;
	}
	return out;
}

/**
 * Check that wavelengths are finite and strictly monotonic; return the arrays in increasing order.
 * `where(i)` names point i for the message (a line of text or a pixel).
 */
function ordered(
	wavelength: Float64Array,
	flux: Float64Array,
	error: Float64Array | undefined,
	where: (i: number) => string
): { wavelength: Float64Array; flux: Float64Array; error?: Float64Array } {
	const n = wavelength.length;
	if (n === 0) throw new SpectrumError('the spectrum has no points');
	for (let i = 0; i < n; i++) {
		if (!Number.isFinite(wavelength[i])) throw new SpectrumError(`${where(i)}: the wavelength is not a finite number`);
	}
	if (n === 1) throw new SpectrumError('the spectrum has only one point');
	// The direction is the whole spectrum's, so that one bad point is named where it is.
	const increasing = wavelength[n - 1] > wavelength[0];
	for (let i = 1; i < n; i++) {
		const [a, b] = [wavelength[i - 1], wavelength[i]];
		if (increasing ? b > a : b < a) continue;
		throw new SpectrumError(
			`${where(i)}: wavelength ${b} ${b === a ? 'repeats the one before' : `does not ${increasing ? 'increase' : 'decrease'} from ${a}`}; wavelengths must run in one direction without repeats`
		);
	}
	if (increasing) return { wavelength, flux, ...(error ? { error } : {}) };
	return { wavelength: wavelength.reverse(), flux: flux.reverse(), ...(error ? { error: error.reverse() } : {}) };
}

// ───────────────────────────── ASCII ─────────────────────────────

const NUMBER = /^[+-]?(\d+\.?\d*|\.\d+)([eEdD][+-]?\d+)?$/;
const NAN_WORD = /^[+-]?nan$/i;
const NAME_WITH_UNIT = /^([^[(]*?)\s*[[(]\s*([^\])]*?)\s*[\])]$/;

function tokens(line: string): string[] {
	const t = line.trim();
	return t.includes(',') ? t.split(',').map((s) => s.trim()) : t.split(/\s+/);
}

function splitNameUnit(token: string): { name: string; unit: string | null } {
	const m = NAME_WITH_UNIT.exec(token.trim());
	return m ? { name: m[1], unit: m[2] === '' ? null : m[2] } : { name: token.trim(), unit: null };
}

/** Units declared in astropy ECSV comments: `# - {name: flux, unit: erg / (Angstrom cm2 s), datatype: float64}`. */
function ecsvUnits(comments: string[]): Map<string, string> {
	const out = new Map<string, string>();
	for (const c of comments) {
		const m = /^#\s*-\s*\{\s*name:\s*([^,}]+?)\s*,(.*)\}\s*$/.exec(c);
		if (!m) continue;
		const u = /(?:^|,)\s*unit:\s*([^,}]+?)\s*(?:,|$)/.exec(m[2]);
		if (u) out.set(m[1].replace(/^['"]|['"]$/g, '').toLowerCase(), u[1].replace(/^['"]|['"]$/g, ''));
	}
	return out;
}

/**
 * Read an ASCII spectrum (see the module comment). Throws SpectrumError naming the first bad line
 * and how many more there are.
 */
export function readAsciiSpectrum(text: string): Spectrum {
	const lines = text.replace(/^\uFEFF/, '').split(/\r?\n|\r/);
	const comments: string[] = [];
	let lastCommentBeforeData: string | null = null;
	let header: { names: string[]; units: (string | null)[]; line: number } | null = null;
	const rows: { line: number; cells: string[] }[] = [];
	for (let k = 0; k < lines.length; k++) {
		const t = lines[k].trim();
		if (t === '') continue;
		if (t.startsWith('#')) {
			comments.push(t);
			if (rows.length === 0 && header === null) lastCommentBeforeData = t;
			continue;
		}
		const cells = tokens(t);
		// A header is a first line of names only; a line mixing numbers and text is a bad data row, not a header.
		if (rows.length === 0 && header === null && cells.every((c) => !NUMBER.test(c) && !NAN_WORD.test(c))) {
			const parts = cells.map(splitNameUnit);
			header = { names: parts.map((p) => p.name), units: parts.map((p) => p.unit), line: k + 1 };
			continue;
		}
		rows.push({ line: k + 1, cells });
	}
	if (rows.length === 0) {
		throw new SpectrumError(
			header ? 'no data: the file has a header line but no rows of numbers' : comments.length ? 'no data: the file holds only comments' : 'the file is empty'
		);
	}
	const columns = rows[0].cells.length;
	if (header === null && lastCommentBeforeData !== null) {
		// astropy's commented header: a comment of plain column names (with optional units) just before the data.
		const parts = tokens(lastCommentBeforeData.replace(/^#+/, '')).map(splitNameUnit);
		if (parts.length === columns && parts.every((p) => /^[A-Za-z_][\w.-]*$/.test(p.name))) {
			header = { names: parts.map((p) => p.name), units: parts.map((p) => p.unit), line: 0 };
		}
	}
	if (columns === 1) throw new SpectrumError(`line ${rows[0].line}: only one column; a spectrum needs wavelength and flux (and optionally error)`);
	if (header && header.line > 0 && header.names.length !== columns) {
		throw new SpectrumError(`line ${header.line}: the header names ${header.names.length} columns but the data have ${columns}`);
	}
	// Column positions: by name when the header names wavelength and flux, otherwise wavelength, flux, error.
	const roles = header && header.names.length === columns ? header.names.map(roleOf) : [];
	const named = roles.includes('wavelength') && roles.includes('flux');
	if (columns > 3 && !named) {
		throw new SpectrumError(`line ${rows[0].line}: ${columns} columns; expected 2 or 3 (wavelength, flux, error), or a header naming the columns`);
	}
	const errorAt = named ? roles.findIndex((r) => r === 'error' || r === 'ivar' || r === 'variance') : columns === 3 ? 2 : -1;
	const wl = named ? roles.indexOf('wavelength') : 0;
	const fx = named ? roles.indexOf('flux') : 1;
	const er: { at: number; role: Role } | null = errorAt >= 0 ? { at: errorAt, role: named ? roles[errorAt]! : 'error' } : null;

	const n = rows.length;
	const wavelength = new Float64Array(n);
	const flux = new Float64Array(n);
	const rawError = er ? new Float64Array(n) : undefined;
	const problems: string[] = [];
	const value = (cell: string, row: { line: number }, allowNaN: boolean): number => {
		if (NUMBER.test(cell)) return Number(cell.replace(/[dD]/, 'e'));
		if (allowNaN && NAN_WORD.test(cell)) return NaN;
		problems.push(cell === '' ? `line ${row.line}: an empty cell where a number should be` : `line ${row.line}: "${cell.length > 20 ? cell.slice(0, 19) + '…' : cell}" is not a number`);
		return NaN;
	};
	rows.forEach((row, i) => {
		if (row.cells.length !== columns) {
			problems.push(`line ${row.line}: ${row.cells.length} column${row.cells.length === 1 ? '' : 's'} where the first data line has ${columns}`);
			return;
		}
		wavelength[i] = value(row.cells[wl], row, false);
		flux[i] = value(row.cells[fx], row, true);
		if (er && rawError) {
			rawError[i] = value(row.cells[er.at], row, true);
			if (er.role === 'error' && rawError[i] < 0) problems.push(`line ${row.line}: the error ${rawError[i]} is negative`);
		}
	});
	if (problems.length > 0) {
		throw new SpectrumError(problems[0] + (problems.length > 1 ? ` (and ${problems.length - 1} more problem${problems.length > 2 ? 's' : ''})` : ''));
	}
	const ecsv = ecsvUnits(comments);
	const unitOf = (at: number): string | null => header?.units[at] ?? (header ? (ecsv.get(header.names[at].toLowerCase()) ?? null) : null);
	const sorted = ordered(wavelength, flux, rawError && er ? toErrors(rawError, er.role) : undefined, (i) => `line ${rows[i].line}`);
	return { ...sorted, wavelengthUnit: unitOf(wl), fluxUnit: unitOf(fx), format: 'ascii' };
}

// ───────────────────────────── FITS ─────────────────────────────

function fitsReason(e: unknown): SpectrumError {
	const message = (e as Error).message ?? String(e);
	if (/truncated/.test(message)) return new SpectrumError('the FITS file is cut short (truncated); send the whole file again');
	if (/inflates past the limit/.test(message)) return new SpectrumError(message);
	return new SpectrumError(`the FITS file cannot be read: ${message}`);
}

function text(h: Hdu, key: string): string | null {
	const v = h.header.values.get(key);
	return typeof v === 'string' && v.trim() !== '' ? v.trim() : null;
}

function num(h: Hdu, key: string): number | undefined {
	const v = h.header.values.get(key);
	return typeof v === 'number' ? v : undefined;
}

/** Why a 1-D image's wavelength axis cannot be used, or null if it can. */
function linearAxisProblem(h: Hdu): string | null {
	const ctype = text(h, 'CTYPE1');
	if (num(h, 'DC-FLAG') === 1) return 'its wavelength axis is log-linear (DC-FLAG = 1); only linear axes are read';
	if (ctype && /-LOG$/i.test(ctype)) return `its wavelength axis is logarithmic (CTYPE1 = '${ctype}'); only linear axes are read`;
	if (ctype && !/^(WAVE|AWAV|LINEAR|LAMBDA|WAVELENGTH)(\b|-|$)/i.test(ctype)) {
		return `its axis is '${ctype}', not wavelength (expected CTYPE1 WAVE, AWAV or LINEAR)`;
	}
	if (num(h, 'CRVAL1') === undefined) return 'it has no CRVAL1 (the wavelength at the reference pixel)';
	const step = num(h, 'CD1_1') ?? num(h, 'CDELT1');
	if (step === undefined) return 'it has neither CDELT1 nor CD1_1 (the wavelength step per pixel)';
	if (step === 0) return 'its wavelength step (CDELT1 or CD1_1) is 0';
	return null;
}

function imageSpectrum(file: FitsFile, hdu: Hdu): Spectrum {
	const img = readImage(file, hdu);
	const n = img.axes[0];
	const crval = num(hdu, 'CRVAL1')!;
	const cd = num(hdu, 'CD1_1');
	// A CD matrix, when present, replaces CDELT/PC (Greisen & Calabretta 2002 §2.1.2; from memory).
	const step = cd ?? num(hdu, 'CDELT1')! * (num(hdu, 'PC1_1') ?? 1);
	const crpix = num(hdu, 'CRPIX1') ?? 0;
	const wavelength = new Float64Array(n);
	for (let i = 0; i < n; i++) wavelength[i] = crval + step * (i + 1 - crpix);
	const flux = img.data.subarray(0, n);
	const wat = text(hdu, 'WAT1_001');
	const watUnits = wat ? (/units=(\S+)/.exec(wat)?.[1] ?? null) : null;
	const sorted = ordered(wavelength, flux, undefined, (i) => `pixel ${i + 1}`);
	return { ...sorted, wavelengthUnit: text(hdu, 'CUNIT1') ?? watUnits, fluxUnit: text(hdu, 'BUNIT'), format: 'fits-image' };
}

function tableSpectrum(file: FitsFile, hdu: Hdu): Spectrum | null {
	const t = readBinTable(file, hdu);
	const find = (roles: Role[]) => t.columns.find((c) => roles.includes(roleOf(c.name) as Role));
	const w = find(['wavelength']);
	const f = find(['flux']);
	if (!w || !f) return null;
	const e = find(['error']) ?? find(['ivar']) ?? find(['variance']);
	const values = (c: typeof w): Float64Array => {
		if (Array.isArray(c.data) || c.code === 'L') throw new SpectrumError(`the FITS table's column ${c.name} holds ${c.code === 'L' ? 'true/false values' : 'text'}, not numbers`);
		const d = c.data as Exclude<typeof c.data, string[]>;
		const out = new Float64Array(d.length);
		for (let i = 0; i < d.length; i++) out[i] = Number(d[i]);
		return out;
	};
	const wavelength = values(w);
	const flux = values(f);
	const rawError = e ? values(e) : undefined;
	const sameLength = (c: typeof w, v: Float64Array) => {
		if (v.length !== wavelength.length) {
			throw new SpectrumError(`the FITS table's column ${c.name} has ${v.length} values but ${w.name} has ${wavelength.length}`);
		}
	};
	sameLength(f, flux);
	if (e && rawError) sameLength(e, rawError);
	const pixel = (i: number) => (w.repeat > 1 ? `row ${Math.floor(i / w.repeat) + 1}, element ${(i % w.repeat) + 1}` : `row ${i + 1}`);
	const sorted = ordered(wavelength, flux, rawError && e ? toErrors(rawError, roleOf(e.name)!) : undefined, pixel);
	return { ...sorted, wavelengthUnit: w.unit || null, fluxUnit: f.unit || null, format: 'fits-table' };
}

/** Read a spectrum from FITS bytes (see the module comment for what is looked for). */
export function readFitsSpectrum(bytes: Uint8Array, maxBytes = DEFAULT_MAX_SPECTRUM_BYTES): Spectrum {
	let file: FitsFile;
	try {
		file = readFits(bytes, { maxDecompressedBytes: maxBytes });
	} catch (e) {
		throw e instanceof FitsError ? fitsReason(e) : e;
	}
	const notes: string[] = [];
	for (const hdu of file.hdus) {
		try {
			if (hdu.kind === 'PRIMARY' || hdu.kind === 'IMAGE') {
				const naxis = num(hdu, 'NAXIS') ?? 0;
				if (naxis === 0) continue;
				const axes = Array.from({ length: naxis }, (_, k) => num(hdu, `NAXIS${k + 1}`) ?? 0);
				const where = hdu.index === 0 ? 'the primary image' : `image HDU ${hdu.index}`;
				if (axes.slice(1).some((a) => a !== 1)) {
					notes.push(`${where} is ${axes.join(' × ')} pixels; only one-dimensional spectra are read`);
					continue;
				}
				const problem = linearAxisProblem(hdu);
				if (problem) {
					notes.push(`${where} is one-dimensional but ${problem}`);
					continue;
				}
				return imageSpectrum(file, hdu);
			}
			if (hdu.kind === 'BINTABLE') {
				const s = tableSpectrum(file, hdu);
				if (s) return s;
				notes.push(`table HDU ${hdu.index} has no columns named like wavelength and flux`);
			}
		} catch (e) {
			throw e instanceof FitsError ? fitsReason(e) : e;
		}
	}
	throw new SpectrumError(
		notes.length > 0
			? `no spectrum found in the FITS file: ${notes[0]}`
			: 'no spectrum found in the FITS file: expected a 1-D image with CRVAL1, CDELT1 (or CD1_1) and CRPIX1, or a table with wavelength and flux columns'
	);
}
