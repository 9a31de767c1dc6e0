import type { PageServerLoad } from './$types';
import { can } from '$lib/server/people/permissions';
import { requirePermission } from '$lib/server/people/guard';
import { listTelescopes } from '$lib/server/people/telescopes';

export const load: PageServerLoad = ({ locals }) => {
	requirePermission('telescopes.view');
	return { telescopes: listTelescopes(), canManage: can({ user: locals.user }, 'telescopes.manage') };
};
