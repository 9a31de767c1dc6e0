import { describe, expect, it } from 'vitest';
import { positionErrText } from './position.ts';

describe('positionErrText', () => {
	it('writes the radius to two significant figures with the arcsecond sign', () => {
		expect.assertions(4);
		expect(positionErrText(0.35)).toBe(' ± 0.35″');
		expect(positionErrText(0.123)).toBe(' ± 0.12″');
		expect(positionErrText(12)).toBe(' ± 12″');
		expect(positionErrText(60)).toBe(' ± 60″');
	});

	it('leaves the sign off for a figure that carries it after the uncertainty', () => {
		expect.assertions(1);
		expect(`12.3${positionErrText(0.5, '')}″`).toBe('12.3 ± 0.5″');
	});

	it('writes nothing when no uncertainty was reported', () => {
		expect.assertions(2);
		expect(positionErrText(null)).toBe('');
		expect(positionErrText(undefined)).toBe('');
	});
});
