import { describe, expect, it } from 'vitest';
import { telescopeInput } from './telescopes';

const good = {
	name: 'Unit Scope',
	teamId: 't1',
	siteName: 'Ridge',
	latitudeDeg: '-30.2',
	longitudeDeg: '-70.8',
	elevationM: '2400',
	apertureM: '0.6',
	fovShape: 'rectangle',
	fovWidthDeg: '0.4',
	fovHeightDeg: '0.3',
	filters: 'g, r,i',
	limitingMag: '20.5',
	limitingMagExposureS: '300',
	minAltitudeDeg: '25',
	maxAirmass: '2.4',
	minSunSeparationDeg: '45',
	minMoonSeparationDeg: '20',
	slewOverheadS: '60'
};

function errorsOf(input: Record<string, unknown>) {
	const r = telescopeInput.safeParse(input);
	return r.success ? {} : Object.fromEntries(r.error.issues.map((i) => [String(i.path[0]), i.message]));
}

describe('telescope input', () => {
	it('accepts a complete telescope and turns text into numbers and a filter list', () => {
		const r = telescopeInput.parse(good);
		expect(r.latitudeDeg).toBe(-30.2);
		expect(r.filters).toEqual(['g', 'r', 'i']);
		expect(r.fovHeightDeg).toBe(0.3);
		expect(r.robotic).toBe(false);
	});
	it('gives a circle its diameter as both dimensions', () => {
		expect(telescopeInput.parse({ ...good, fovShape: 'circle', fovHeightDeg: '' }).fovHeightDeg).toBe(0.4);
	});
	it.each([
		['latitudeDeg', '90.01', 'between -90 and 90'],
		['latitudeDeg', '-91', 'between -90 and 90'],
		['longitudeDeg', '180.5', 'between -180 and 180'],
		['longitudeDeg', 'east', 'must be a number'],
		['fovWidthDeg', '0', 'greater than 0'],
		['fovWidthDeg', '-1', 'greater than 0'],
		['fovHeightDeg', '0', 'height greater than 0'],
		['apertureM', '', 'Enter an aperture'],
		['maxAirmass', '0.9', 'between 1 and 40'],
		['name', 'x'.repeat(61), 'At most 60'],
		['filters', 'g; DROP TABLE', 'short names'],
		['fovShape', 'hexagon', 'circle or rectangle']
	])('refuses %s = %j with a field message', (field, value, message) => {
		expect(errorsOf({ ...good, [field]: value })[field]).toContain(message);
	});
	it('accepts the edges of the ranges', () => {
		expect(errorsOf({ ...good, latitudeDeg: '90', longitudeDeg: '-180' })).toEqual({});
	});
});
