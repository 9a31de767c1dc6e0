import { describe, expect, it } from 'vitest';
import { filterAndSort, needsSpectrum, type ListedCandidate } from './list.ts';

const row = (name: string, o: Partial<ListedCandidate> = {}): ListedCandidate => ({
	name,
	state: 'open',
	discoveredAt: '2026-12-02T05:00:00Z',
	verdict: null,
	credibleLevel: null,
	hostPValue: null,
	spectra: 0,
	...o
});

describe('candidate lists', () => {
	const rows = [
		row('A', { verdict: 'kilonova-like', credibleLevel: 0.5, hostPValue: 0.2, discoveredAt: '2026-12-02T06:00:00Z' }),
		row('B', { state: 'rejected', verdict: 'kilonova-like', credibleLevel: 0.1 }),
		row('C', { state: 'promoted', credibleLevel: null, hostPValue: 0.9, spectra: 1 }),
		row('D', { state: 'promoted', credibleLevel: 0.3 })
	];
	it('needs a spectrum: promoted or kilonova-like, not rejected, none uploaded', () => {
		expect(rows.filter(needsSpectrum).map((r) => r.name)).toEqual(['A', 'D']);
	});
	it('filters by state and verdict', () => {
		const f = { state: 'any' as const, kilonovaLikeOnly: true, needsSpectrumOnly: false };
		expect(filterAndSort(rows, f, 'name').map((r) => r.name)).toEqual(['A', 'B']);
		expect(filterAndSort(rows, { ...f, kilonovaLikeOnly: false, state: 'promoted' }, 'name').map((r) => r.name)).toEqual(['C', 'D']);
	});
	it('sorts by credible level ascending and host p descending, missing values last', () => {
		const f = { state: 'any' as const, kilonovaLikeOnly: false, needsSpectrumOnly: false };
		expect(filterAndSort(rows, f, 'credible').map((r) => r.name)).toEqual(['B', 'D', 'A', 'C']);
		expect(filterAndSort(rows, f, 'hostP').map((r) => r.name).slice(0, 2)).toEqual(['C', 'A']);
		expect(filterAndSort(rows, f, 'newest')[0].name).toBe('A');
	});
});
