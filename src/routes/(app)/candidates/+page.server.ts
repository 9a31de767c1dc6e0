import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { listAllCandidates } from '$lib/server/candidates/candidates';
import { vettingSummaries } from '$lib/server/candidates/vetting';

export const load: PageServerLoad = () => {
	requirePermission('events.view');
	const all = listAllCandidates();
	const vetted = vettingSummaries(all.candidates.map((c) => c.id));
	return { ...all, candidates: all.candidates.map((c) => ({ ...c, ...vetted.get(c.id)! })) };
};
