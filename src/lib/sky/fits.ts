/**
 * Minimal FITS reader for HEALPix sky maps: primary HDU + BINTABLE extensions.
 *
 * Follows the FITS Standard 4.0 (IAU FITS Working Group, 2018): 2880-byte blocks,
 * 80-character header cards, big-endian binary data, TFORM/TSCAL/TZERO of §7.3,
 * and the CONTINUE long-string convention (§4.2.1.2).
 *
 * No I/O: the caller passes the file's bytes. Gzip input (RFC 1952 magic 1f 8b) is
 * inflated with node:zlib under a hard output cap so that a small hostile file cannot
 * exhaust memory.
 */
import { gunzipSync } from 'node:zlib';

export const FITS_BLOCK_BYTES = 2880;
const CARD_BYTES = 80;
const CARDS_PER_BLOCK = FITS_BLOCK_BYTES / CARD_BYTES;

/** Default cap on gunzipped size: a flat nside-2048 map with two float64 columns fits (≈ 805 MB). */
export const DEFAULT_MAX_DECOMPRESSED_BYTES = 1024 * 1024 * 1024;

export class FitsError extends Error {
	constructor(message: string) {
		super(message);
		this.name = 'FitsError';
	}
}

/** Gzip input that would inflate past the caller's cap (a compression bomb, or a map too large to hold). */
export class FitsInflateLimitError extends FitsError {
	constructor(readonly limitBytes: number) {
		super(`gzip data inflates past the limit of ${Math.round(limitBytes / 1048576)} MiB (${limitBytes} bytes); refused`);
		this.name = 'FitsInflateLimitError';
	}
}

export type HeaderValue = string | number | boolean | bigint | null;

export interface FitsHeader {
	/** Keyword → value of the first card with that keyword (COMMENT/HISTORY excluded). */
	values: Map<string, HeaderValue>;
	/** Raw 80-character cards up to and including END. */
	cards: string[];
}

export interface Hdu {
	index: number;
	/** 'PRIMARY' or the XTENSION value ('BINTABLE', 'IMAGE', ...). */
	kind: string;
	header: FitsHeader;
	/** Byte offset of the data unit within the (decompressed) file. */
	dataOffset: number;
	/** Data bytes without padding. */
	dataBytes: number;
}

export interface FitsFile {
	bytes: Uint8Array;
	hdus: Hdu[];
	/** True when the input was gzip-compressed. */
	gzipped: boolean;
	/**
	 * True when `bytes` belong to the reader (inflated from gzip, or given up by the caller with
	 * `reuseInput`): a column that fills whole rows is then decoded in place, without a copy.
	 */
	owned: boolean;
	/** HDUs whose data were decoded in place (byte-swapped): they cannot be decoded a second time. */
	decodedInPlace: Set<number>;
}

export type ColumnData =
	| Float64Array
	| Float32Array
	| Int32Array
	| Uint32Array
	| Int16Array
	| Uint16Array
	| Uint8Array
	| Int8Array
	| BigInt64Array
	| BigUint64Array
	| string[];

export interface Column {
	name: string;
	/** TFORM type code: L, B, I, J, K, E, D or A. */
	code: string;
	/** Elements per row (for A: characters per row, and data holds one string per row). */
	repeat: number;
	unit: string | null;
	/** Row-major values: element k of row i is at i * repeat + k (for A: index i). For L: 1 true, 0 false, 255 undefined. */
	data: ColumnData;
}

export interface BinTable {
	rows: number;
	columns: Column[];
	header: FitsHeader;
	/** Column by TTYPE name, case-insensitive. */
	column(name: string): Column | undefined;
}

export interface ReadFitsOptions {
	/** Refuse gzip input that inflates past this many bytes. */
	maxDecompressedBytes?: number;
	/**
	 * The caller gives up the input bytes: big-endian columns are swapped in place and returned as
	 * views into them (no copy of a 100 MB flat map). The bytes are garbage for the caller afterwards.
	 */
	reuseInput?: boolean;
}

function isGzip(bytes: Uint8Array): boolean {
	return bytes.length >= 2 && bytes[0] === 0x1f && bytes[1] === 0x8b;
}

/** Inflate gzip bytes, refusing output beyond `maxBytes` (node:zlib maxOutputLength stops inflation early). */
export function gunzipCapped(bytes: Uint8Array, maxBytes = DEFAULT_MAX_DECOMPRESSED_BYTES): Uint8Array {
	try {
		const out = gunzipSync(bytes, { maxOutputLength: maxBytes });
		return new Uint8Array(out.buffer, out.byteOffset, out.byteLength);
	} catch (e) {
		const err = e as NodeJS.ErrnoException;
		if (err.code === 'ERR_BUFFER_TOO_LARGE' || err instanceof RangeError) {
			throw new FitsInflateLimitError(maxBytes);
		}
		throw new FitsError(`gzip data is corrupt: ${err.message}`);
	}
}

function parseValue(card: string, keyword: string): HeaderValue {
	const raw = card.slice(10);
	const s = raw.trimStart();
	if (s.startsWith("'")) {
		// Quotes inside strings are doubled ('').
		let out = '';
		let i = 1;
		for (;;) {
			const q = s.indexOf("'", i);
			if (q < 0) throw new FitsError(`header card ${keyword}: unterminated string`);
			out += s.slice(i, q);
			if (s[q + 1] === "'") {
				out += "'";
				i = q + 2;
			} else break;
		}
		return out.replace(/ +$/, '');
	}
	const slash = s.indexOf('/');
	const v = (slash >= 0 ? s.slice(0, slash) : s).trim();
	if (v === '') return null;
	if (v === 'T') return true;
	if (v === 'F') return false;
	if (/^[+-]?\d+$/.test(v)) {
		const n = Number(v);
		return Number.isSafeInteger(n) ? n : BigInt(v);
	}
	if (/^[+-]?(\d+\.?\d*|\.\d+)([EeDd][+-]?\d+)?$/.test(v)) return Number(v.replace(/[Dd]/, 'E'));
	// Complex and other forms are kept as text; no map keyword needs them.
	return v;
}

function parseHeader(bytes: Uint8Array, start: number, hduIndex: number): { header: FitsHeader; end: number } {
	const cards: string[] = [];
	const values = new Map<string, HeaderValue>();
	let pos = start;
	let lastStringKey: string | null = null;
	for (;;) {
		if (pos + FITS_BLOCK_BYTES > bytes.length) {
			throw new FitsError(
				pos === start
					? `HDU ${hduIndex}: file ends where a header block should start (truncated file)`
					: `HDU ${hduIndex}: header has no END card before the end of the file (truncated file)`
			);
		}
		for (let c = 0; c < CARDS_PER_BLOCK; c++) {
			const off = pos + c * CARD_BYTES;
			let card = '';
			for (let k = 0; k < CARD_BYTES; k++) {
				const b = bytes[off + k];
				if (b < 0x20 || b > 0x7e) {
					throw new FitsError(
						`HDU ${hduIndex}: header card ${cards.length + 1} holds a non-ASCII byte 0x${b.toString(16).padStart(2, '0')} (garbage header or not a FITS file)`
					);
				}
				card += String.fromCharCode(b);
			}
			cards.push(card);
			const keyword = card.slice(0, 8).trimEnd();
			if (keyword === 'END') {
				return { header: { cards, values }, end: pos + FITS_BLOCK_BYTES };
			}
			if (keyword === 'CONTINUE') {
				// CONTINUE cards carry the value in columns 11+ without '= '.
				if (lastStringKey !== null) {
					const prev = values.get(lastStringKey);
					const more = parseValue("          " + card.slice(10), 'CONTINUE');
					if (typeof prev === 'string' && prev.endsWith('&') && typeof more === 'string') {
						values.set(lastStringKey, prev.slice(0, -1) + more);
						continue;
					}
				}
				lastStringKey = null;
				continue;
			}
			if (card.slice(8, 10) !== '= ') {
				lastStringKey = null;
				continue; // COMMENT, HISTORY, blank, or commentary keywords
			}
			if (!/^[A-Z0-9_-]+$/.test(keyword)) {
				throw new FitsError(`HDU ${hduIndex}: invalid header keyword "${keyword}"`);
			}
			const value = parseValue(card, keyword);
			if (!values.has(keyword)) values.set(keyword, value);
			lastStringKey = typeof value === 'string' ? keyword : null;
		}
		pos += FITS_BLOCK_BYTES;
	}
}

function intKeyword(h: FitsHeader, key: string, hduIndex: number, fallback?: number): number {
	const v = h.values.get(key);
	if (v === undefined) {
		if (fallback !== undefined) return fallback;
		throw new FitsError(`HDU ${hduIndex}: missing required keyword ${key}`);
	}
	if (typeof v !== 'number' || !Number.isInteger(v)) {
		throw new FitsError(`HDU ${hduIndex}: keyword ${key} must be an integer, got ${String(v)}`);
	}
	return v;
}

/**
 * Parse the HDU structure of a FITS file (FITS Standard 4.0 §3–§4, §7.3).
 * Throws FitsError with a one-line reason on anything malformed.
 */
export function readFits(input: Uint8Array, options: ReadFitsOptions = {}): FitsFile {
	let bytes = input;
	const gzipped = isGzip(input);
	if (gzipped) bytes = gunzipCapped(input, options.maxDecompressedBytes ?? DEFAULT_MAX_DECOMPRESSED_BYTES);
	if (bytes.length === 0) throw new FitsError('empty file');
	const first = String.fromCharCode(...bytes.subarray(0, Math.min(30, bytes.length)));
	if (!/^SIMPLE  = +T/.test(first)) {
		throw new FitsError('not a FITS file: it does not begin with "SIMPLE  =                    T"');
	}
	const hdus: Hdu[] = [];
	let pos = 0;
	while (pos < bytes.length) {
		const index = hdus.length;
		if (index > 0 && bytes.length - pos < FITS_BLOCK_BYTES) {
			throw new FitsError(
				`file length ${bytes.length} is not a whole number of ${FITS_BLOCK_BYTES}-byte blocks (truncated file or wrong block size)`
			);
		}
		if (index > 0 && String.fromCharCode(...bytes.subarray(pos, pos + 8)) !== 'XTENSION') {
			throw new FitsError(`HDU ${index}: no XTENSION card at byte ${pos} (wrong block size or garbage after HDU ${index - 1})`);
		}
		const { header, end } = parseHeader(bytes, pos, index);
		let kind = 'PRIMARY';
		if (index > 0) {
			const x = header.values.get('XTENSION');
			if (typeof x !== 'string') throw new FitsError(`HDU ${index}: XTENSION has no string value`);
			kind = x.trim();
		}
		const bitpix = intKeyword(header, 'BITPIX', index);
		if (![8, 16, 32, 64, -32, -64].includes(bitpix)) throw new FitsError(`HDU ${index}: invalid BITPIX ${bitpix}`);
		const naxis = intKeyword(header, 'NAXIS', index);
		if (naxis < 0 || naxis > 999) throw new FitsError(`HDU ${index}: invalid NAXIS ${naxis}`);
		let elements = naxis === 0 ? 0 : 1;
		for (let k = 1; k <= naxis; k++) {
			const n = intKeyword(header, `NAXIS${k}`, index);
			if (n < 0) throw new FitsError(`HDU ${index}: negative NAXIS${k}`);
			elements *= n;
		}
		const pcount = index > 0 ? intKeyword(header, 'PCOUNT', index, 0) : 0;
		const gcount = index > 0 ? intKeyword(header, 'GCOUNT', index, 1) : 1;
		const dataBytes = naxis === 0 ? 0 : (Math.abs(bitpix) / 8) * gcount * (pcount + elements);
		if (end + dataBytes > bytes.length) {
			throw new FitsError(
				`HDU ${index}: data unit needs ${dataBytes} bytes but only ${bytes.length - end} remain (truncated file)`
			);
		}
		hdus.push({ index, kind, header, dataOffset: end, dataBytes });
		const padded = Math.ceil(dataBytes / FITS_BLOCK_BYTES) * FITS_BLOCK_BYTES;
		pos = end + padded;
		if (pos > bytes.length) {
			throw new FitsError(
				`file length ${bytes.length} is not a whole number of ${FITS_BLOCK_BYTES}-byte blocks (wrong block size or truncated padding)`
			);
		}
		// Trailing zero bytes after the last HDU are tolerated only as whole blocks.
		if (pos < bytes.length && bytes[pos] === 0) {
			if ((bytes.length - pos) % FITS_BLOCK_BYTES !== 0) break;
			let allZero = true;
			for (let i = pos; i < bytes.length && allZero; i++) allZero = bytes[i] === 0;
			if (allZero) break;
		}
	}
	if (bytes.length % FITS_BLOCK_BYTES !== 0) {
		throw new FitsError(
			`file length ${bytes.length} is not a whole number of ${FITS_BLOCK_BYTES}-byte blocks (wrong block size)`
		);
	}
	return { bytes, hdus, gzipped, owned: gzipped || options.reuseInput === true, decodedInPlace: new Set() };
}

const ELEMENT_BYTES: Record<string, number> = { L: 1, B: 1, I: 2, J: 4, K: 8, E: 4, D: 8, A: 1 };

interface ColumnLayout {
	name: string;
	code: string;
	repeat: number;
	offset: number;
	unit: string | null;
	scale: number;
	zero: number | bigint;
}

/** Gather one column's bytes (all rows) into a fresh contiguous buffer. */
function gather(src: Uint8Array, base: number, rows: number, stride: number, offset: number, width: number): Uint8Array {
	const out = new Uint8Array(rows * width);
	if (stride === width && offset === 0) {
		out.set(src.subarray(base, base + rows * width));
		return out;
	}
	if (width > 32) {
		for (let r = 0, s = base + offset, d = 0; r < rows; r++, s += stride, d += width) {
			out.set(src.subarray(s, s + width), d);
		}
		return out;
	}
	// Narrow cells: a plain byte loop beats creating a subarray per row.
	for (let r = 0, s = base + offset, d = 0; r < rows; r++, s += stride) {
		for (let b = 0; b < width; b++) out[d++] = src[s + b];
	}
	return out;
}

type SwapFn = (buf: Uint8Array) => void;

const NodeBuffer = (globalThis as { Buffer?: typeof Buffer }).Buffer;

function swapper(size: 2 | 4 | 8): SwapFn {
	// Buffer#swapNN swaps in place natively; fall back to a JS loop outside Node.
	if (NodeBuffer) {
		return (buf) => {
			const b = NodeBuffer.from(buf.buffer, buf.byteOffset, buf.byteLength);
			if (size === 2) b.swap16();
			else if (size === 4) b.swap32();
			else b.swap64();
		};
	}
	return (buf) => {
		for (let i = 0; i < buf.length; i += size) {
			for (let a = i, z = i + size - 1; a < z; a++, z--) {
				const t = buf[a];
				buf[a] = buf[z];
				buf[z] = t;
			}
		}
	};
}

const littleEndianHost = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

function decodeNumeric(raw: Uint8Array, code: string): Exclude<ColumnData, string[]> {
	const size = ELEMENT_BYTES[code] as 1 | 2 | 4 | 8;
	if (size > 1 && littleEndianHost) swapper(size as 2 | 4 | 8)(raw);
	const n = raw.length / size;
	switch (code) {
		case 'B':
		case 'L':
			return raw;
		case 'I':
			return new Int16Array(raw.buffer, raw.byteOffset, n);
		case 'J':
			return new Int32Array(raw.buffer, raw.byteOffset, n);
		case 'K':
			return new BigInt64Array(raw.buffer, raw.byteOffset, n);
		case 'E':
			return new Float32Array(raw.buffer, raw.byteOffset, n);
		case 'D':
			return new Float64Array(raw.buffer, raw.byteOffset, n);
	}
	throw new FitsError(`unsupported column type ${code}`);
}

function applyScaling(
	data: Exclude<ColumnData, string[]>,
	code: string,
	scale: number,
	zero: number | bigint
): Exclude<ColumnData, string[]> {
	const zeroNum = typeof zero === 'bigint' ? Number(zero) : zero;
	if (scale === 1 && zeroNum === 0) return data;
	// Unsigned-integer conventions of FITS 4.0 Table 19 map to exact typed arrays.
	if (scale === 1) {
		if (code === 'B' && zeroNum === -128) return xorSign8(data as Uint8Array);
		if (code === 'I' && zeroNum === 32768) return xorSign16(data as Int16Array);
		if (code === 'J' && zeroNum === 2147483648) return xorSign32(data as Int32Array);
		if (code === 'K' && typeof zero === 'bigint' && zero === 9223372036854775808n) {
			const u = new BigUint64Array(data.buffer, data.byteOffset, data.length);
			for (let i = 0; i < u.length; i++) u[i] ^= 9223372036854775808n;
			return u;
		}
	}
	const out = new Float64Array(data.length);
	if (data instanceof BigInt64Array) {
		for (let i = 0; i < data.length; i++) out[i] = zeroNum + scale * Number(data[i]);
	} else {
		const d = data as Float64Array;
		for (let i = 0; i < d.length; i++) out[i] = zeroNum + scale * d[i];
	}
	return out;
}

function xorSign8(d: Uint8Array): Int8Array {
	const out = new Int8Array(d.length);
	for (let i = 0; i < d.length; i++) out[i] = (d[i] ^ 0x80) << 24 >> 24;
	return out;
}
function xorSign16(d: Int16Array): Uint16Array {
	const out = new Uint16Array(d.buffer, d.byteOffset, d.length);
	for (let i = 0; i < out.length; i++) out[i] ^= 0x8000;
	return out;
}
function xorSign32(d: Int32Array): Uint32Array {
	const out = new Uint32Array(d.buffer, d.byteOffset, d.length);
	for (let i = 0; i < out.length; i++) out[i] = (out[i] ^ 0x80000000) >>> 0;
	return out;
}

function parseTform(tform: string, hduIndex: number, n: number): { repeat: number; code: string } {
	const m = /^\s*(\d*)([A-Z])(.*)$/.exec(tform);
	if (!m) throw new FitsError(`HDU ${hduIndex}: cannot parse TFORM${n} = '${tform}'`);
	const repeat = m[1] === '' ? 1 : Number(m[1]);
	const code = m[2];
	if (!(code in ELEMENT_BYTES)) {
		throw new FitsError(`HDU ${hduIndex}: unsupported column type TFORM${n} = '${tform}' (supported: L, B, I, J, K, E, D, A)`);
	}
	return { repeat, code };
}

/**
 * Decode a BINTABLE HDU into typed-array columns (FITS Standard 4.0 §7.3).
 * `only` restricts decoding to the named columns (case-insensitive) to save time and memory.
 */
export function readBinTable(file: FitsFile, hdu: Hdu, only?: string[]): BinTable {
	if (hdu.kind !== 'BINTABLE') throw new FitsError(`HDU ${hdu.index} is ${hdu.kind}, not BINTABLE`);
	const h = hdu.header;
	const i = hdu.index;
	const bitpix = intKeyword(h, 'BITPIX', i);
	if (bitpix !== 8) throw new FitsError(`HDU ${i}: BINTABLE requires BITPIX = 8, got ${bitpix}`);
	if (intKeyword(h, 'NAXIS', i) !== 2) throw new FitsError(`HDU ${i}: BINTABLE requires NAXIS = 2`);
	const rowBytes = intKeyword(h, 'NAXIS1', i);
	const rows = intKeyword(h, 'NAXIS2', i);
	const nfields = intKeyword(h, 'TFIELDS', i);
	const wanted = only?.map((s) => s.toUpperCase());
	const layouts: ColumnLayout[] = [];
	let offset = 0;
	for (let n = 1; n <= nfields; n++) {
		const tform = h.values.get(`TFORM${n}`);
		if (typeof tform !== 'string') throw new FitsError(`HDU ${i}: missing required keyword TFORM${n}`);
		const { repeat, code } = parseTform(tform, i, n);
		const ttype = h.values.get(`TTYPE${n}`);
		const name = typeof ttype === 'string' && ttype.trim() !== '' ? ttype.trim() : `COL${n}`;
		const tunit = h.values.get(`TUNIT${n}`);
		const tscal = h.values.get(`TSCAL${n}`);
		const tzero = h.values.get(`TZERO${n}`);
		layouts.push({
			name,
			code,
			repeat,
			offset,
			unit: typeof tunit === 'string' ? tunit.trim() : null,
			scale: typeof tscal === 'number' ? tscal : 1,
			zero: typeof tzero === 'number' || typeof tzero === 'bigint' ? tzero : 0
		});
		offset += repeat * ELEMENT_BYTES[code];
	}
	if (offset !== rowBytes) {
		throw new FitsError(`HDU ${i}: columns add up to ${offset} bytes per row but NAXIS1 = ${rowBytes}`);
	}
	if (file.decodedInPlace.has(i)) throw new FitsError(`HDU ${i}: its data were already decoded in place; read the file again`);
	const columns: Column[] = [];
	for (const l of layouts) {
		if (wanted && !wanted.includes(l.name.toUpperCase())) continue;
		const width = l.repeat * ELEMENT_BYTES[l.code];
		const element = ELEMENT_BYTES[l.code];
		// A column that fills whole rows is already contiguous: decode it where it lies when the
		// bytes are ours and aligned for the typed-array view (data units start on 2880-byte blocks).
		const inPlace =
			file.owned && l.code !== 'A' && width === rowBytes && l.offset === 0 && (file.bytes.byteOffset + hdu.dataOffset) % element === 0;
		if (inPlace) file.decodedInPlace.add(i);
		const raw = inPlace
			? file.bytes.subarray(hdu.dataOffset, hdu.dataOffset + rows * width)
			: gather(file.bytes, hdu.dataOffset, rows, rowBytes, l.offset, width);
		let data: ColumnData;
		if (l.code === 'A') {
			const strings: string[] = new Array(rows);
			const decoder = new TextDecoder('latin1');
			for (let r = 0; r < rows; r++) {
				const cell = raw.subarray(r * width, (r + 1) * width);
				const nul = cell.indexOf(0);
				strings[r] = decoder.decode(nul >= 0 ? cell.subarray(0, nul) : cell).replace(/ +$/, '');
			}
			data = strings;
		} else {
			data = decodeNumeric(raw, l.code);
			if (l.code !== 'L') data = applyScaling(data, l.code, l.scale, l.zero);
			else {
				const u = data as Uint8Array;
				for (let k = 0; k < u.length; k++) u[k] = u[k] === 0x54 ? 1 : u[k] === 0x46 ? 0 : 255;
			}
		}
		columns.push({ name: l.name, code: l.code, repeat: l.repeat, unit: l.unit, data });
	}
	return {
		rows,
		columns,
		header: h,
		column: (name) => columns.find((c) => c.name.toUpperCase() === name.toUpperCase())
	};
}

/** Header keyword lookup that also searches the primary header (some writers put NSIDE etc. there). */
export function keyword(file: FitsFile, hdu: Hdu, key: string): HeaderValue | undefined {
	return hdu.header.values.get(key) ?? file.hdus[0]?.header.values.get(key);
}

export interface FitsImage {
	/** NAXIS1, NAXIS2, … (the first axis varies fastest in `data`). */
	axes: number[];
	/** Physical values BZERO + BSCALE × stored value (FITS Standard 4.0 §5.3); integer BLANK pixels become NaN. */
	data: Float64Array;
	header: FitsHeader;
}

/**
 * Decode the data array of a primary HDU or IMAGE extension (FITS Standard 4.0 §5.2–§5.3, §7.1):
 * big-endian values of type BITPIX, scaled by BSCALE/BZERO, with integer BLANK pixels as NaN.
 * Always returns float64 so that scaled 16- and 32-bit data keep their precision.
 */
export function readImage(file: FitsFile, hdu: Hdu): FitsImage {
	if (hdu.kind !== 'PRIMARY' && hdu.kind !== 'IMAGE') throw new FitsError(`HDU ${hdu.index} is ${hdu.kind}, not an image`);
	const h = hdu.header;
	const i = hdu.index;
	const bitpix = intKeyword(h, 'BITPIX', i);
	const naxis = intKeyword(h, 'NAXIS', i);
	const axes: number[] = [];
	for (let k = 1; k <= naxis; k++) axes.push(intKeyword(h, `NAXIS${k}`, i));
	const count = naxis === 0 ? 0 : axes.reduce((a, b) => a * b, 1);
	const bscale = h.values.get('BSCALE');
	const bzero = h.values.get('BZERO');
	const blank = h.values.get('BLANK');
	const scale = typeof bscale === 'number' ? bscale : 1;
	const zero = typeof bzero === 'number' ? bzero : typeof bzero === 'bigint' ? Number(bzero) : 0;
	const blankValue = bitpix > 0 && (typeof blank === 'number' || typeof blank === 'bigint') ? Number(blank) : null;
	const view = new DataView(file.bytes.buffer, file.bytes.byteOffset + hdu.dataOffset, count * (Math.abs(bitpix) / 8));
	const data = new Float64Array(count);
	for (let k = 0; k < count; k++) {
		let v: number;
		switch (bitpix) {
			case 8:
				v = view.getUint8(k);
				break;
			case 16:
				v = view.getInt16(k * 2, false);
				break;
			case 32:
				v = view.getInt32(k * 4, false);
				break;
			case 64:
				v = Number(view.getBigInt64(k * 8, false));
				break;
			case -32:
				v = view.getFloat32(k * 4, false);
				break;
			default:
				v = view.getFloat64(k * 8, false);
		}
		data[k] = blankValue !== null && v === blankValue ? NaN : zero + scale * v;
	}
	return { axes, data, header: h };
}
