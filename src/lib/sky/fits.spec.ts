import { readFileSync } from 'node:fs';
import { gzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { FITS_BLOCK_BYTES, readBinTable, readFits, readImage } from './fits.ts';
import { writeBinTableFits } from './fits-write.ts';

const moc = new Uint8Array(readFileSync(new URL('../../../tests/fixtures/sky/moc_map.fits', import.meta.url)));

function patchCard(bytes: Uint8Array, key: string, text: string): Uint8Array {
	const out = bytes.slice();
	const s = new TextDecoder('latin1').decode(out);
	const at = s.indexOf(key.padEnd(8) + '=');
	if (at < 0) throw new Error(`no card ${key}`);
	const card = text.padEnd(80);
	for (let i = 0; i < 80; i++) out[at + i] = card.charCodeAt(i);
	return out;
}

describe('FITS reader (FITS Standard 4.0)', () => {
	it('reads the astropy table, including a CONTINUE long string', () => {
		expect.hasAssertions();
		const f = readFits(moc);
		expect(f.hdus.map((h) => h.kind)).toEqual(['PRIMARY', 'BINTABLE']);
		const origin = f.hdus[1].header.values.get('ORIGIN') as string;
		// make_fixtures.py writes this 135-character value, which astropy splits over CONTINUE cards.
		expect(origin).toBe('synthetic two-blob map for Strainline tests; '.repeat(3).trimEnd());
		expect(f.hdus[1].header.cards.some((c) => c.startsWith('CONTINUE'))).toBe(true);
		const t = readBinTable(f, f.hdus[1]);
		expect(t.columns.map((c) => c.name)).toEqual(['UNIQ', 'PROBDENSITY', 'DISTMU', 'DISTSIGMA', 'DISTNORM']);
		expect(t.column('uniq')!.data).toBeInstanceOf(BigInt64Array);
		expect(t.column('PROBDENSITY')!.unit).toBe('sr-1');
	});

	it('decodes J, E, D, K and applies TSCAL/TZERO (unsigned 32-bit convention, Table 19)', () => {
		expect.hasAssertions();
		const bytes = writeBinTableFits(
			[
				{ name: 'A', code: 'J', data: Int32Array.from([-2147483648, -1, 0, 2147483647]) },
				{ name: 'B', code: 'E', data: Float32Array.from([1.5, -2.25, 0, 3e38]) },
				{ name: 'C', code: 'D', data: Float64Array.from([Math.PI, -1e-300, 0, 1e300]) },
				{ name: 'D', code: 'K', data: BigInt64Array.from([-(2n ** 63n), -1n, 0n, 2n ** 63n - 1n]) },
				{ name: 'S', code: 'J', data: Int32Array.from([1, 2, 3, 4]) }
			],
			[['TZERO1', 2147483648], ['TSCAL5', 0.5], ['TZERO5', 10]]
		);
		const f = readFits(bytes);
		const t = readBinTable(f, f.hdus[1]);
		expect(Array.from(t.column('A')!.data as Uint32Array)).toEqual([0, 2147483647, 2147483648, 4294967295]);
		expect(Array.from(t.column('B')!.data as Float32Array)).toEqual([1.5, -2.25, 0, Math.fround(3e38)]);
		expect(Array.from(t.column('C')!.data as Float64Array)).toEqual([Math.PI, -1e-300, 0, 1e300]);
		expect(Array.from(t.column('D')!.data as BigInt64Array)).toEqual([-(2n ** 63n), -1n, 0n, 2n ** 63n - 1n]);
		expect(Array.from(t.column('S')!.data as Float64Array)).toEqual([10.5, 11, 11.5, 12]);
	});

	it('refuses a truncated file', () => {
		expect.hasAssertions();
		expect(() => readFits(moc.subarray(0, moc.length - 3 * FITS_BLOCK_BYTES))).toThrow(/truncated file/);
		expect(() => readFits(moc.subarray(0, FITS_BLOCK_BYTES + 100))).toThrow(/truncated/);
		expect(() => readFits(moc.subarray(0, 500))).toThrow(/truncated/);
	});

	it('refuses a file whose length is not whole 2880-byte blocks', () => {
		expect.hasAssertions();
		const longer = new Uint8Array(moc.length + 1000);
		longer.set(moc);
		longer.fill(0x20, moc.length);
		expect(() => readFits(longer)).toThrow(/2880-byte blocks/);
		// The same table laid out in 2048-byte blocks: the extension header is not where FITS puts it.
		const f = readFits(moc);
		const ext = moc.subarray(f.hdus[1].dataOffset - Math.ceil((f.hdus[1].header.cards.length * 80) / 2880) * 2880);
		const primaryCards = moc.subarray(0, f.hdus[0].header.cards.length * 80);
		const blocks2048 = new Uint8Array(2048 + ext.length).fill(0x20);
		blocks2048.set(primaryCards);
		blocks2048.set(ext, 2048);
		expect(() => readFits(blocks2048)).toThrow(/wrong block size/);
	});

	it('refuses garbage headers with a reason', () => {
		expect.hasAssertions();
		expect(() => readFits(new TextEncoder().encode('<html>not a map</html>'))).toThrow(/not a FITS file/);
		const binary = moc.slice();
		binary[FITS_BLOCK_BYTES + 200] = 0x07;
		expect(() => readFits(binary)).toThrow(/non-ASCII byte 0x07/);
		expect(() => readFits(patchCard(moc, 'NAXIS2', 'NAXIS2  =                  abc'))).toThrow(/NAXIS2 must be an integer/);
		const noTform = patchCard(moc, 'TFORM2', 'COMMENT gone');
		const f = readFits(noTform);
		expect(() => readBinTable(f, f.hdus[1])).toThrow(/missing required keyword TFORM2/);
		const badType = patchCard(moc, 'TFORM2', "TFORM2  = '1C      '");
		const g = readFits(badType);
		expect(() => readBinTable(g, g.hdus[1])).toThrow(/unsupported column type TFORM2 = '1C'/);
	});

	it('refuses a gzip bomb quickly (3.2 GB from 3 MB, cap 64 MiB)', () => {
		expect.hasAssertions();
		const member = gzipSync(new Uint8Array(16 * 1024 * 1024));
		const bomb = new Uint8Array(member.length * 200);
		for (let k = 0; k < 200; k++) bomb.set(member, k * member.length);
		const t0 = performance.now();
		expect(() => readFits(bomb, { maxDecompressedBytes: 64 * 1024 * 1024 })).toThrow(/inflates past the limit/);
		expect(performance.now() - t0).toBeLessThan(3000);
	});

	it('refuses corrupt gzip', () => {
		expect.hasAssertions();
		const gz = gzipSync(moc);
		expect(() => readFits(gz.subarray(0, gz.length / 2))).toThrow(/gzip data is corrupt/);
	});
});

/** A one-HDU FITS file from header cards (key, value text) and big-endian data bytes. */
function imageFits(cards: [string, string][], data: Uint8Array): Uint8Array {
	const text = [...cards.map(([k, v]) => `${k.padEnd(8)}= ${v.padStart(20)}`.padEnd(80)), 'END'.padEnd(80)].join('');
	const headerBytes = Math.ceil(text.length / FITS_BLOCK_BYTES) * FITS_BLOCK_BYTES;
	const out = new Uint8Array(headerBytes + Math.ceil(data.length / FITS_BLOCK_BYTES) * FITS_BLOCK_BYTES);
	out.fill(0x20, 0, headerBytes);
	for (let i = 0; i < text.length; i++) out[i] = text.charCodeAt(i);
	out.set(data, headerBytes);
	return out;
}

describe('FITS image data (FITS Standard 4.0 §5.3)', () => {
	const spectra = JSON.parse(readFileSync(new URL('../../../tests/fixtures/candidates/spectra.json', import.meta.url), 'utf8'));
	const fixture = (name: string) => new Uint8Array(readFileSync(new URL(`../../../tests/fixtures/candidates/spectra/${name}`, import.meta.url)));

	it('reads a float32 primary image written by astropy', () => {
		expect.hasAssertions();
		const f = readFits(fixture('image.fits'));
		const img = readImage(f, f.hdus[0]);
		const ref = spectra.files['image.fits'];
		expect(img.axes).toEqual([ref.points]);
		expect(img.data[0]).toBe(ref.first.flux);
		expect(img.data.reduce((a, b) => a + b, 0)).toBeCloseTo(ref.fluxSum, 6);
	});

	it('applies BSCALE/BZERO to int16 data in an IMAGE extension (astropy scaled it)', () => {
		expect.hasAssertions();
		const f = readFits(fixture('image-cd-scaled.fits'));
		expect(f.hdus.map((h) => h.kind)).toEqual(['PRIMARY', 'IMAGE']);
		const img = readImage(f, f.hdus[1]);
		const ref = spectra.files['image-cd-scaled.fits'];
		expect(img.data.length).toBe(ref.points);
		// astropy returns float32 after scaling; we keep float64, so agree to float32 precision.
		expect(img.data[0]).toBeCloseTo(ref.first.flux, 5);
		expect(Math.abs(img.data.reduce((a, b) => a + b, 0) - ref.fluxSum) / Math.abs(ref.fluxSum)).toBeLessThan(1e-6);
		expect(() => readImage(f, { ...f.hdus[1], kind: 'BINTABLE' })).toThrow(/not an image/);
	});

	it('turns BLANK integer pixels into NaN and scales the rest', () => {
		expect.hasAssertions();
		const data = new Uint8Array(8);
		const view = new DataView(data.buffer);
		[-32768, 0, 100, 32767].forEach((v, k) => view.setInt16(k * 2, v, false));
		const bytes = imageFits(
			[['SIMPLE', 'T'], ['BITPIX', '16'], ['NAXIS', '1'], ['NAXIS1', '4'], ['BSCALE', '0.5'], ['BZERO', '10.0'], ['BLANK', '-32768']],
			data
		);
		const f = readFits(bytes);
		expect(Array.from(readImage(f, f.hdus[0]).data)).toEqual([NaN, 10, 60, 10 + 0.5 * 32767]);
	});
});
