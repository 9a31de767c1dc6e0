import { error } from '@sveltejs/kit';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/guard';
import { listTeams } from '$lib/server/teams';
import { getTelescope } from '$lib/server/telescopes';
import { saveTelescope } from '$lib/server/telescope-actions';

export const load: PageServerLoad = ({ params }) => {
	requirePermission('telescopes.manage');
	const telescope = getTelescope(params.telescopeId);
	if (!telescope) error(404, 'No such telescope.');
	return { telescope, teams: listTeams().map((t) => ({ id: t.id, name: t.name })) };
};

export const actions: Actions = { default: (event) => saveTelescope(event, event.params.telescopeId) };
