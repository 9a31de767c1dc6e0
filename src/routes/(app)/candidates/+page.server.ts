import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/guard';

export const load: PageServerLoad = () => {
	requirePermission('events.view');
	return {};
};
