import { describe, expect, it } from 'vitest';
import { describeMergerClock, dominantClass, farPerYear, formatArea, formatDistance, formatElapsed, formatFar, formatPercent, formatUtc, SECONDS_PER_JULIAN_YEAR } from './display';

describe('false-alarm rate', () => {
	it('converts Hz to per year with the Julian year (IAU: 365.25 d of 86 400 s)', () => {
		expect(SECONDS_PER_JULIAN_YEAR).toBe(365.25 * 86_400);
		expect(farPerYear(1 / SECONDS_PER_JULIAN_YEAR)).toBeCloseTo(1, 12);
		// 1 per month in Hz ≈ 3.8e-7 (the order of a public-alert threshold; common practice).
		expect(farPerYear(3.8e-7)).toBeCloseTo(11.99, 2);
		expect(farPerYear(null)).toBeNull();
		expect(farPerYear(Number.NaN)).toBeNull();
	});
	it('writes rare rates as "1 in N yr" and frequent ones per year', () => {
		expect(formatFar(1 / (100 * SECONDS_PER_JULIAN_YEAR))).toBe('0.01 per yr (1 in 100 yr)');
		expect(formatFar(0.0004 / SECONDS_PER_JULIAN_YEAR)).toBe('0.0004 per yr (1 in 2,500 yr)');
		expect(formatFar(12 / SECONDS_PER_JULIAN_YEAR)).toBe('12 per yr');
		expect(formatFar(0.9 / SECONDS_PER_JULIAN_YEAR)).toBe('0.9 per yr (1 in 1.1 yr)');
		expect(formatFar(0.08 / SECONDS_PER_JULIAN_YEAR)).toBe('0.08 per yr (1 in 13 yr)');
		expect(formatFar(2e-7 / SECONDS_PER_JULIAN_YEAR)).toBe('2e-7 per yr (1 in 5e+6 yr)');
		expect(formatFar(null)).toBe('FAR unknown');
	});
});

describe('classification and numbers', () => {
	it('picks the most probable class, ignoring missing ones', () => {
		expect(dominantClass({ BNS: 0.2, NSBH: 0.45, BBH: 0.05, Terrestrial: 0.3 })).toEqual({ name: 'NSBH', probability: 0.45 });
		expect(dominantClass({ BNS: null, Terrestrial: 0.9 })).toEqual({ name: 'Terrestrial', probability: 0.9 });
		expect(dominantClass(null)).toBeNull();
		expect(dominantClass({})).toBeNull();
	});
	it('formats percentages, areas, distances, durations and instants', () => {
		expect(formatPercent(0.973)).toBe('97%');
		expect(formatPercent(0.001)).toBe('<1%');
		expect(formatPercent(0)).toBe('0%');
		expect(formatArea(4.26)).toBe('4.3 deg²');
		expect(formatArea(1234.6)).toBe('1,235 deg²');
		expect(formatDistance(117.6, 24.4)).toBe('118 ± 24 Mpc');
		expect(formatDistance(117.6, null)).toBe('118 Mpc');
		expect(formatDistance(null, 3)).toBe('—');
		expect(formatElapsed(42_900)).toBe('42 s');
		expect(formatElapsed(185_000)).toBe('3 min 05 s');
		expect(formatElapsed((2 * 60 + 7) * 60_000)).toBe('2 h 07 min');
		expect(formatElapsed((47 * 60 + 5) * 60_000)).toBe('47 h 05 min');
		expect(formatElapsed(100 * 3600_000)).toBe('4 d 4 h');
		expect(formatUtc('2026-03-01T12:03:04.567Z')).toBe('2026-03-01 12:03:04 UTC');
	});
});

describe('merger clock', () => {
	it('runs while the event is live and stops at the retraction', () => {
		const merger = '2030-04-13T14:00:00.000Z';
		const later = Date.parse('2030-04-13T18:30:00Z');
		expect(describeMergerClock(merger, later)).toBe('4 h 30 min since merger');
		// Retracted 1 h 40 min after the merger: the same words whatever the time now.
		expect(describeMergerClock(merger, later, '2030-04-13T15:40:00.000Z')).toBe('stood down 1 h 40 min after the merger');
		expect(describeMergerClock(merger, later + 86_400_000, '2030-04-13T15:40:00.000Z')).toBe('stood down 1 h 40 min after the merger');
		expect(describeMergerClock(merger, later, '2030-04-13T13:00:00.000Z')).toBe('stood down');
		expect(describeMergerClock(null, later)).toBe('—');
	});
});
