import type { PageServerLoad } from './$types';
import { can } from '$lib/server/permissions';
import { requirePermission } from '$lib/server/guard';
import { listTelescopes } from '$lib/server/telescopes';

export const load: PageServerLoad = ({ locals }) => {
	requirePermission('telescopes.view');
	return { telescopes: listTelescopes(), canManage: can({ user: locals.user }, 'telescopes.manage') };
};
