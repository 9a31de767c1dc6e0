import { describe, expect, it } from 'vitest';
import { joinNegativeValues } from './args';

describe('joinNegativeValues', () => {
	it('keeps negative numbers with their option', () => {
		expect(joinNegativeValues(['night', '--lat', '-29.25', '--lon', '-70.7', '--json'])).toEqual([
			'night',
			'--lat=-29.25',
			'--lon=-70.7',
			'--json'
		]);
		expect(joinNegativeValues(['--dec', '-.5'])).toEqual(['--dec=-.5']);
	});
	it('leaves flags that follow a flag alone', () => {
		expect(joinNegativeValues(['--refraction', '--json'])).toEqual(['--refraction', '--json']);
		expect(joinNegativeValues(['--lat', '10', '-h'])).toEqual(['--lat', '10', '-h']);
	});
});
