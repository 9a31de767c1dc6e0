import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { REPORTED_REJECTS } from '$lib/server/targeting/catalogs';
import { CATALOG_MAX_BYTES } from '$lib/limits';

export const load: PageServerLoad = () => {
	requirePermission('catalogs.manage');
	return { maxBytes: CATALOG_MAX_BYTES, reported: REPORTED_REJECTS };
};
