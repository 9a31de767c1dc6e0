import type { Actions, PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/guard';
import { listTeams } from '$lib/server/teams';
import { saveTelescope } from '$lib/server/telescope-actions';

export const load: PageServerLoad = () => {
	requirePermission('telescopes.manage');
	return { teams: listTeams().map((t) => ({ id: t.id, name: t.name })) };
};

export const actions: Actions = { default: (event) => saveTelescope(event, null) };
