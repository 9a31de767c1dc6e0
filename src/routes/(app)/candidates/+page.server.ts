import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { listAllCandidates } from '$lib/server/candidates/candidates';

export const load: PageServerLoad = () => {
	requirePermission('events.view');
	return listAllCandidates();
};
