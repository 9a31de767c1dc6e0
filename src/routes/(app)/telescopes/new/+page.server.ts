import type { Actions, PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { listTeams } from '$lib/server/people/teams';
import { saveTelescope } from '$lib/server/people/telescope-actions';

export const load: PageServerLoad = () => {
	requirePermission('telescopes.manage');
	return { teams: listTeams().map((t) => ({ id: t.id, name: t.name })) };
};

export const actions: Actions = { default: (event) => saveTelescope(event, null) };
