/**
 * Minimal FITS writer: an empty primary HDU and one BINTABLE (FITS Standard 4.0 §7.3),
 * enough to write HEALPix sky maps (multi-order or flat). Used by tests, benchmarks and
 * the demo alert broker.
 */
import { FITS_BLOCK_BYTES } from './fits.ts';

export interface WriteColumn {
	name: string;
	/** K: 64-bit integer (BigInt64Array or safe-integer Float64Array), J: int32, E: float32, D: float64. */
	code: 'K' | 'J' | 'E' | 'D';
	data: Float64Array | Float32Array | Int32Array | BigInt64Array;
	unit?: string;
}

export type CardValue = string | number | boolean;

function card(key: string, value: CardValue, comment?: string): string {
	let v: string;
	if (typeof value === 'string') v = `'${value.replace(/'/g, "''").padEnd(8)}'`.padEnd(20);
	else if (typeof value === 'boolean') v = (value ? 'T' : 'F').padStart(20);
	else if (Number.isInteger(value)) v = String(value).padStart(20);
	else v = value.toExponential(15).toUpperCase().padStart(20);
	let c = `${key.padEnd(8)}= ${v}`;
	if (comment) c += ` / ${comment}`;
	if (c.length > 80) throw new RangeError(`header card for ${key} is longer than 80 characters`);
	return c.padEnd(80);
}

function headerBlock(cards: string[]): Uint8Array {
	const all = [...cards, 'END'.padEnd(80)];
	const blocks = Math.ceil((all.length * 80) / FITS_BLOCK_BYTES);
	const out = new Uint8Array(blocks * FITS_BLOCK_BYTES).fill(0x20);
	const text = all.join('');
	for (let i = 0; i < text.length; i++) out[i] = text.charCodeAt(i);
	return out;
}

const WIDTH = { K: 8, J: 4, E: 4, D: 8 } as const;

/** Serialise a primary HDU plus one BINTABLE with the given columns and extra header cards. */
export function writeBinTableFits(columns: WriteColumn[], extraCards: [string, CardValue, string?][] = []): Uint8Array {
	const rows = columns[0]?.data.length ?? 0;
	for (const c of columns) if (c.data.length !== rows) throw new RangeError(`column ${c.name} has ${c.data.length} rows, expected ${rows}`);
	const rowBytes = columns.reduce((s, c) => s + WIDTH[c.code], 0);
	const primary = headerBlock([card('SIMPLE', true), card('BITPIX', 8), card('NAXIS', 0), card('EXTEND', true)]);
	const cards = [
		card('XTENSION', 'BINTABLE'),
		card('BITPIX', 8),
		card('NAXIS', 2),
		card('NAXIS1', rowBytes),
		card('NAXIS2', rows),
		card('PCOUNT', 0),
		card('GCOUNT', 1),
		card('TFIELDS', columns.length)
	];
	columns.forEach((c, k) => {
		cards.push(card(`TTYPE${k + 1}`, c.name), card(`TFORM${k + 1}`, `1${c.code}`));
		if (c.unit) cards.push(card(`TUNIT${k + 1}`, c.unit));
	});
	for (const [k, v, comment] of extraCards) cards.push(card(k, v, comment));
	const header = headerBlock(cards);
	const dataBytes = rows * rowBytes;
	const data = new Uint8Array(Math.ceil(dataBytes / FITS_BLOCK_BYTES) * FITS_BLOCK_BYTES);
	const view = new DataView(data.buffer);
	let offset = 0;
	for (const c of columns) {
		const w = WIDTH[c.code];
		for (let r = 0, p = offset; r < rows; r++, p += rowBytes) {
			const v = c.data[r];
			if (c.code === 'K') view.setBigInt64(p, typeof v === 'bigint' ? v : BigInt(v as number), false);
			else if (c.code === 'J') view.setInt32(p, v as number, false);
			else if (c.code === 'E') view.setFloat32(p, v as number, false);
			else view.setFloat64(p, v as number, false);
		}
		offset += w;
	}
	const out = new Uint8Array(primary.length + header.length + data.length);
	out.set(primary, 0);
	out.set(header, primary.length);
	out.set(data, primary.length + header.length);
	return out;
}
