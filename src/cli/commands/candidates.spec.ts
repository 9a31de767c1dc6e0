import { describe, expect, it } from 'vitest';
import lightcurve from './lightcurve.ts';
import spectrum from './spectrum.ts';

const fixture = (name: string) => new URL(`../../../tests/fixtures/candidates/${name}`, import.meta.url).pathname;

describe('lightcurve and spectrum commands keep their JSON shapes', () => {
	it('lightcurve FILE.csv → { filters: { F: { detections, upperLimits, rateMagPerDay, rateErr, first, last } } }', async () => {
		expect.hasAssertions();
		const { json } = await lightcurve.run([fixture('lightcurve-kilonova-like.csv')], {});
		const filters = (json as { filters: Record<string, Record<string, unknown>> }).filters;
		expect(Object.keys(filters)).toEqual(['g', 'i', 'r']);
		expect(Object.keys(filters.g)).toEqual(['detections', 'upperLimits', 'rateMagPerDay', 'rateErr', 'first', 'last']);
		expect(filters.i).toEqual({ detections: 0, upperLimits: 1, rateMagPerDay: null, rateErr: null, first: null, last: null });
	});

	it('spectrum FILE → { points, wavelengthMin, wavelengthMax, wavelengthUnit, fluxUnit, hasErrors }', async () => {
		expect.hasAssertions();
		const { json } = await spectrum.run([fixture('spectra/image.fits')], {});
		expect(json).toEqual({ points: 2000, wavelengthMin: 3800, wavelengthMax: 7298.25, wavelengthUnit: 'Angstrom', fluxUnit: '1e-17 erg/s/cm2/Angstrom', hasErrors: false });
	});

	it('refuses bad input with a one-line reason naming the file', async () => {
		expect.hasAssertions();
		await expect(spectrum.run([fixture('spectra/table.fits')], { 'max-mb': '0.01' })).rejects.toThrow(/table\.fits: the file is 0\.033 MB, over the limit of 0\.01 MB$/);
		await expect(spectrum.run([fixture('spectra/bad-truncated.fits')], {})).rejects.toThrow(/cut short \(truncated\)/);
		await expect(spectrum.run([fixture('spectra/table.fits')], { 'max-mb': 'lots' })).rejects.toThrow('--max-mb must be a positive number, got "lots"');
		await expect(lightcurve.run([fixture('spectra/bad-one-column.txt')], {})).rejects.toThrow(
			'2 problems; the first, line 2: unknown column "1.0e-17" (expected time, filter, mag, mag_err, limit)'
		);
	});
});
