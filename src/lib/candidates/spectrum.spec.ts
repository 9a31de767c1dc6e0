import { readFileSync } from 'node:fs';
import { gzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { readAsciiSpectrum, readSpectrum, SpectrumError, summariseSpectrum, type Spectrum } from './spectrum.ts';

const dir = new URL('../../../tests/fixtures/candidates/', import.meta.url);
// Files written by astropy and what astropy reads back from them (make_spectra.py).
const reference = JSON.parse(readFileSync(new URL('spectra.json', dir), 'utf8'));
const file = (name: string) => new Uint8Array(readFileSync(new URL(`spectra/${name}`, dir)));
const sum = (a: Float64Array) => a.reduce((s, v) => s + v, 0);
const rel = (a: number, b: number) => Math.abs(a - b) / Math.abs(b);

function matchesReference(s: Spectrum, name: string, tolerance: number): void {
	const ref = reference.files[name];
	expect(summariseSpectrum(s)).toEqual({
		points: ref.points,
		wavelengthMin: expect.closeTo(ref.wavelengthMin, 6),
		wavelengthMax: expect.closeTo(ref.wavelengthMax, 6),
		wavelengthUnit: ref.wavelengthUnit,
		fluxUnit: ref.fluxUnit,
		hasErrors: ref.hasErrors
	});
	expect(rel(s.flux[0], ref.first.flux)).toBeLessThan(tolerance);
	expect(rel(s.flux[s.flux.length - 1], ref.last.flux)).toBeLessThan(tolerance);
	expect(rel(sum(s.flux), ref.fluxSum)).toBeLessThan(tolerance);
	expect(rel(sum(s.wavelength), ref.wavelengthSum)).toBeLessThan(1e-12);
	if (ref.hasErrors) expect(rel(sum(s.error!), ref.errorSum)).toBeLessThan(tolerance);
	for (let i = 1; i < s.wavelength.length; i++) if (!(s.wavelength[i] > s.wavelength[i - 1])) throw new Error(`not increasing at ${i}`);
}

describe('spectrum readers on files astropy wrote', () => {
	const cases: [string, Spectrum['format'], number][] = [
		['ascii-ecsv.ecsv', 'ascii', 1e-14],
		['ascii-basic.txt', 'ascii', 1e-14],
		['ascii-csv.csv', 'ascii', 1e-14],
		['ascii-commented.txt', 'ascii', 1e-14],
		['table.fits', 'fits-table', 1e-14],
		['table-ivar.fits', 'fits-table', 1e-6],
		['image.fits', 'fits-image', 1e-12],
		// astropy keeps scaled int16 data as float32; we keep float64.
		['image-cd-scaled.fits', 'fits-image', 1e-6]
	];
	for (const [name, format, tolerance] of cases) {
		it(`${name} (${format})`, () => {
			expect.hasAssertions();
			const s = readSpectrum(file(name));
			expect(s.format).toBe(format);
			matchesReference(s, name, tolerance);
		});
	}

	it('tells the format by content, not by name, and reads gzip', () => {
		expect.hasAssertions();
		const s = readSpectrum(gzipSync(file('table.fits')));
		expect(s.format).toBe('fits-table');
		matchesReference(s, 'table.fits', 1e-14);
		expect(readSpectrum(gzipSync(file('ascii-csv.csv'))).format).toBe('ascii');
	});

	it('turns a decreasing spectrum around', () => {
		expect.hasAssertions();
		const s = readAsciiSpectrum('# wavelength decreasing\n5000 3 0.1\n4000 2 0.2\n3000 1 0.3\n');
		expect(Array.from(s.wavelength)).toEqual([3000, 4000, 5000]);
		expect(Array.from(s.flux)).toEqual([1, 2, 3]);
		expect(Array.from(s.error!)).toEqual([0.3, 0.2, 0.1]);
	});

	it('orders columns by header names and reads units from them', () => {
		expect.hasAssertions();
		const s = readAsciiSpectrum('flux [1e-17 erg/s/cm2/A], err, wave (nm), sky\n1.0, 0.1, 400, 5\n2.0, 0.2, 401, 6\n');
		expect(Array.from(s.wavelength)).toEqual([400, 401]);
		expect(Array.from(s.flux)).toEqual([1, 2]);
		expect(Array.from(s.error!)).toEqual([0.1, 0.2]);
		expect([s.wavelengthUnit, s.fluxUnit]).toEqual(['nm', '1e-17 erg/s/cm2/A']);
	});

	it('keeps masked pixels (nan flux) but not a nan wavelength', () => {
		expect.hasAssertions();
		expect(Number.isNaN(readAsciiSpectrum('4000 nan\n4001 1\n').flux[0])).toBe(true);
		expect(() => readAsciiSpectrum('4000 1\nnan 1\n')).toThrow('line 2: "nan" is not a number');
	});
});

describe('bad spectrum files get a one-line reason', () => {
	const reason = (bytes: Uint8Array, maxBytes?: number): string => {
		try {
			readSpectrum(bytes, { maxBytes });
		} catch (e) {
			expect(e).toBeInstanceOf(SpectrumError);
			expect((e as Error).message).not.toContain('\n');
			return (e as Error).message;
		}
		throw new Error('expected the file to be refused');
	};

	it('text in a number, one column, comments only, 0 bytes', () => {
		expect.hasAssertions();
		expect(reason(file('bad-text-in-number.txt'))).toBe('line 4: "abc" is not a number');
		expect(reason(file('bad-one-column.txt'))).toBe('line 2: only one column; a spectrum needs wavelength and flux (and optionally error)');
		expect(reason(file('bad-comments-only.txt'))).toBe('no data: the file holds only comments');
		expect(reason(file('bad-zero-bytes.txt'))).toBe('the file is empty (0 bytes)');
		expect(reason(new TextEncoder().encode('\n\n'))).toBe('the file is empty');
		expect(reason(new TextEncoder().encode('wave flux\n'))).toBe('no data: the file has a header line but no rows of numbers');
	});

	it('truncated FITS, over the size limit, wavelengths out of order, a 2-D image, not a spectrum', () => {
		expect.hasAssertions();
		expect(reason(file('bad-truncated.fits'))).toBe('the FITS file is cut short (truncated); send the whole file again');
		expect(reason(file('table.fits'), 20_000)).toBe('the file is 0.033 MB, over the limit of 0.019 MB');
		expect(reason(new Uint8Array(21 * 1024 * 1024))).toBe('the file is 21 MB, over the limit of 20 MB');
		expect(reason(gzipSync(new Uint8Array(200_000)), 100_000)).toBe('the gzip file unpacks to more than 0.095 MB, over the limit');
		expect(reason(file('bad-unordered.txt'))).toBe(
			'line 3: wavelength 4001 does not increase from 4002; wavelengths must run in one direction without repeats'
		);
		expect(reason(file('bad-2d-image.fits'))).toBe(
			'no spectrum found in the FITS file: the primary image is 40 × 5 pixels; only one-dimensional spectra are read'
		);
		expect(reason(Uint8Array.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0xff, 0xfe]))).toBe('not a spectrum file: it is neither FITS nor text');
	});

	it('ragged rows, too many columns, a negative error, a header that does not fit', () => {
		expect.hasAssertions();
		expect(reason(new TextEncoder().encode('4000 1 0.1\n4001 2\n4002 3 0.1 7\n'))).toBe(
			'line 2: 2 columns where the first data line has 3 (and 1 more problem)'
		);
		expect(reason(new TextEncoder().encode('4000 1 0.1 5\n'))).toBe(
			'line 1: 4 columns; expected 2 or 3 (wavelength, flux, error), or a header naming the columns'
		);
		expect(reason(new TextEncoder().encode('4000 1 -0.1\n4001 1 0.1\n'))).toBe('line 1: the error -0.1 is negative');
		expect(reason(new TextEncoder().encode('wave flux err\n4000 1\n4001 1\n'))).toBe('line 1: the header names 3 columns but the data have 2');
		expect(reason(new TextEncoder().encode('4000 1\n4000 1\n'))).toBe(
			'line 2: wavelength 4000 repeats the one before; wavelengths must run in one direction without repeats'
		);
	});
});
