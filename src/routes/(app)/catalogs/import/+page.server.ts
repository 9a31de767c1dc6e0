import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { MAX_CATALOG_BYTES, REPORTED_REJECTS } from '$lib/server/targeting/catalogs';

export const load: PageServerLoad = () => {
	requirePermission('catalogs.manage');
	return { maxBytes: MAX_CATALOG_BYTES, reported: REPORTED_REJECTS };
};
