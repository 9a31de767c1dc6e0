/**
 * A small FITS writer: an empty primary HDU followed by one binary-table extension.
 * Follows the FITS Standard 4.0 (IAU FITS Working Group, 2016): 80-character header cards,
 * 2880-byte blocks padded with spaces (headers) or zeros (data), big-endian binary data.
 */

export type ColumnFormat = 'K' | 'J' | 'D' | 'E';

export interface Column {
	name: string;
	format: ColumnFormat;
	unit?: string;
	/** K columns take bigint or integer numbers. */
	data: ArrayLike<number> | ArrayLike<bigint>;
}

export type CardValue = string | number | boolean;
export interface Card {
	key: string;
	value: CardValue;
	comment?: string;
}

const BLOCK = 2880;
const WIDTH: Record<ColumnFormat, number> = { K: 8, J: 4, D: 8, E: 4 };

function formatFloat(v: number): string {
	if (!Number.isFinite(v)) throw new Error(`FITS header values must be finite, got ${v}`);
	let s = String(v).toUpperCase();
	if (!/[.E]/.test(s)) s += '.0';
	else if (!s.includes('.')) s = s.replace('E', '.0E');
	return s;
}

/** One 80-character header card. */
export function card(key: string, value?: CardValue, comment?: string): string {
	if (!/^[A-Z0-9_-]{1,8}$/.test(key)) throw new Error(`bad FITS keyword "${key}"`);
	let text = key.padEnd(8);
	if (value !== undefined) {
		let v: string;
		if (typeof value === 'string') {
			if (!/^[\x20-\x7e]*$/.test(value)) throw new Error(`FITS string for ${key} must be printable ASCII`);
			const inner = value.replace(/'/g, "''").padEnd(8);
			v = `'${inner}'`;
			if (v.length > 70) throw new Error(`FITS string for ${key} is too long`);
			v = v.padEnd(20);
		} else if (typeof value === 'boolean') {
			v = (value ? 'T' : 'F').padStart(20);
		} else if (Number.isInteger(value) && Math.abs(value) < 1e15) {
			v = String(value).padStart(20);
		} else {
			v = formatFloat(value).padStart(20);
		}
		text += '= ' + v;
		if (comment) text += ' / ' + comment.replace(/[^\x20-\x7e]/g, '?');
	}
	if (text.length > 80) text = text.slice(0, 80);
	return text.padEnd(80);
}

function headerBlock(cards: string[]): Buffer {
	const all = [...cards, card('END')].join('');
	const padded = all.padEnd(Math.ceil(all.length / BLOCK) * BLOCK, ' ');
	return Buffer.from(padded, 'ascii');
}

/** Serialise a FITS file with an empty primary HDU and one BINTABLE extension. */
export function writeBinTable(columns: Column[], extraCards: Card[] = [], extname = 'TABLE'): Buffer {
	if (columns.length === 0) throw new Error('a table needs at least one column');
	const nrows = columns[0].data.length;
	for (const c of columns) {
		if (c.data.length !== nrows) throw new Error(`column ${c.name} has ${c.data.length} rows, expected ${nrows}`);
	}
	const rowBytes = columns.reduce((s, c) => s + WIDTH[c.format], 0);

	const primary = headerBlock([
		card('SIMPLE', true, 'conforms to FITS standard'),
		card('BITPIX', 8, 'array data type'),
		card('NAXIS', 0, 'number of array dimensions'),
		card('EXTEND', true)
	]);

	const cards = [
		card('XTENSION', 'BINTABLE', 'binary table extension'),
		card('BITPIX', 8, 'array data type'),
		card('NAXIS', 2, 'number of array dimensions'),
		card('NAXIS1', rowBytes, 'length of dimension 1'),
		card('NAXIS2', nrows, 'length of dimension 2'),
		card('PCOUNT', 0, 'number of group parameters'),
		card('GCOUNT', 1, 'number of groups'),
		card('TFIELDS', columns.length, 'number of table fields')
	];
	columns.forEach((c, i) => {
		cards.push(card(`TTYPE${i + 1}`, c.name));
		cards.push(card(`TFORM${i + 1}`, c.format));
		if (c.unit) cards.push(card(`TUNIT${i + 1}`, c.unit));
	});
	cards.push(card('EXTNAME', extname));
	for (const k of extraCards) cards.push(card(k.key, k.value, k.comment));
	const header = headerBlock(cards);

	const dataLen = rowBytes * nrows;
	const data = Buffer.alloc(Math.ceil(dataLen / BLOCK) * BLOCK); // zero padding
	const view = new DataView(data.buffer, data.byteOffset, data.byteLength);
	let offset = 0;
	for (let r = 0; r < nrows; r++) {
		for (const c of columns) {
			const v = c.data[r];
			switch (c.format) {
				case 'K':
					view.setBigInt64(offset, typeof v === 'bigint' ? v : BigInt(v as number), false);
					break;
				case 'J':
					view.setInt32(offset, Number(v), false);
					break;
				case 'D':
					view.setFloat64(offset, Number(v), false);
					break;
				case 'E':
					view.setFloat32(offset, Number(v), false);
					break;
			}
			offset += WIDTH[c.format];
		}
	}
	return Buffer.concat([primary, header, data]);
}
