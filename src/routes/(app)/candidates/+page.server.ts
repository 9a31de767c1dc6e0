import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/guard';
import { listAllCandidates } from '$lib/server/candidates';

export const load: PageServerLoad = () => {
	requirePermission('events.view');
	return listAllCandidates();
};
