/**
 * Filtering and sorting of candidate lists (the event's and everyone's), on what each row shows:
 * state, the rules' verdict, the credible level and the host's distance agreement, spectra.
 */
import type { KilonovaVerdict } from './rules.ts';

export interface ListedCandidate {
	name: string;
	state: 'open' | 'rejected' | 'promoted';
	discoveredAt: string;
	verdict: KilonovaVerdict | null;
	credibleLevel: number | null;
	hostPValue: number | null;
	spectra: number;
}

export type CandidateSort = 'newest' | 'credible' | 'hostP' | 'name';
export interface CandidateFilter {
	state: 'any' | 'open' | 'rejected' | 'promoted';
	kilonovaLikeOnly: boolean;
	needsSpectrumOnly: boolean;
}

/**
 * Waiting for a spectrum: not rejected, none uploaded yet, and either promoted by a person or
 * called kilonova-like by the rules.
 */
export function needsSpectrum(c: ListedCandidate): boolean {
	return c.state !== 'rejected' && c.spectra === 0 && (c.state === 'promoted' || c.verdict === 'kilonova-like');
}

/** Missing values sort last whichever way. */
function byNumber(a: number | null, b: number | null, dir: 1 | -1): number {
	if (a === null && b === null) return 0;
	if (a === null) return 1;
	if (b === null) return -1;
	return dir * (a - b);
}

export function filterAndSort<T extends ListedCandidate>(rows: readonly T[], filter: CandidateFilter, sort: CandidateSort): T[] {
	const kept = rows.filter(
		(c) => (filter.state === 'any' || c.state === filter.state) && (!filter.kilonovaLikeOnly || c.verdict === 'kilonova-like') && (!filter.needsSpectrumOnly || needsSpectrum(c))
	);
	const cmp: Record<CandidateSort, (a: T, b: T) => number> = {
		newest: (a, b) => b.discoveredAt.localeCompare(a.discoveredAt),
		// Smaller credible level = more probable position: most probable first.
		credible: (a, b) => byNumber(a.credibleLevel, b.credibleLevel, 1),
		// Larger p = the host's distance agrees better: best agreement first.
		hostP: (a, b) => byNumber(a.hostPValue, b.hostPValue, -1),
		name: (a, b) => a.name.localeCompare(b.name)
	};
	return [...kept].sort(cmp[sort]);
}
