/**
 * The fonts of the PDF, read once per process and unpacked from WOFF 1 to a plain sfnt (TrueType/
 * OpenType) buffer. fontkit reads WOFF 1 directly but inflates a table again on every access, which
 * made each line of text cost ~10 ms; the unpacked font is read in place.
 *
 * WOFF 1 layout (W3C, "WOFF File Format 1.0", §3–5): a 44-byte header (signature 'wOFF', flavor,
 * …, numTables at 12), then 20-byte table entries (tag, offset, compLength, origLength,
 * origChecksum); a table is zlib-compressed when compLength < origLength. The sfnt written here is
 * the 12-byte offset table, 16-byte records (tag, checksum, offset, length) in the same (sorted)
 * order, and each table padded to 4 bytes.
 */
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { inflateSync } from 'node:zlib';

const require = createRequire(import.meta.url);

export const PDF_FONTS = {
	heading: '@fontsource/space-grotesk/files/space-grotesk-latin-600-normal.woff',
	body: '@fontsource/inter/files/inter-latin-400-normal.woff',
	bold: '@fontsource/inter/files/inter-latin-700-normal.woff',
	mono: '@fontsource/jetbrains-mono/files/jetbrains-mono-latin-400-normal.woff'
} as const;

export type PdfFontName = keyof typeof PDF_FONTS;

/** A WOFF 1 file as an sfnt buffer. */
export function woffToSfnt(woff: Buffer): Buffer {
	if (woff.toString('latin1', 0, 4) !== 'wOFF') throw new Error('not a WOFF 1 file');
	const flavor = woff.readUInt32BE(4);
	const numTables = woff.readUInt16BE(12);
	const tables: { tag: Buffer; checksum: number; data: Buffer }[] = [];
	for (let i = 0; i < numTables; i++) {
		const e = 44 + 20 * i;
		const offset = woff.readUInt32BE(e + 4);
		const compLength = woff.readUInt32BE(e + 8);
		const origLength = woff.readUInt32BE(e + 12);
		const raw = woff.subarray(offset, offset + compLength);
		const data = compLength < origLength ? inflateSync(raw) : Buffer.from(raw);
		if (data.length !== origLength) throw new Error('a WOFF table did not unpack to its stated length');
		tables.push({ tag: woff.subarray(e, e + 4), checksum: woff.readUInt32BE(e + 16), data });
	}
	const entrySelector = Math.floor(Math.log2(numTables));
	const searchRange = 2 ** entrySelector * 16;
	const head = Buffer.alloc(12 + 16 * numTables);
	head.writeUInt32BE(flavor, 0);
	head.writeUInt16BE(numTables, 4);
	head.writeUInt16BE(searchRange, 6);
	head.writeUInt16BE(entrySelector, 8);
	head.writeUInt16BE(numTables * 16 - searchRange, 10);
	const parts: Buffer[] = [head];
	let offset = head.length;
	tables.forEach((t, i) => {
		const r = 12 + 16 * i;
		t.tag.copy(head, r);
		head.writeUInt32BE(t.checksum, r + 4);
		head.writeUInt32BE(offset, r + 8);
		head.writeUInt32BE(t.data.length, r + 12);
		const padded = Buffer.alloc((t.data.length + 3) & ~3);
		t.data.copy(padded);
		parts.push(padded);
		offset += padded.length;
	});
	return Buffer.concat(parts);
}

let cache: Record<PdfFontName, Buffer> | null = null;

/** The PDF's fonts as sfnt buffers (read and unpacked once per process). */
export function pdfFonts(): Record<PdfFontName, Buffer> {
	cache ??= Object.fromEntries(Object.entries(PDF_FONTS).map(([name, path]) => [name, woffToSfnt(readFileSync(require.resolve(path)))])) as Record<PdfFontName, Buffer>;
	return cache;
}
