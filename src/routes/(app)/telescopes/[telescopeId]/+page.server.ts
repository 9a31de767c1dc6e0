import { error } from '@sveltejs/kit';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { listTeams } from '$lib/server/people/teams';
import { getTelescope } from '$lib/server/people/telescopes';
import { saveTelescope } from '$lib/server/people/telescope-actions';

export const load: PageServerLoad = ({ params }) => {
	requirePermission('telescopes.manage');
	const telescope = getTelescope(params.telescopeId);
	if (!telescope) error(404, 'No such telescope.');
	return { telescope, teams: listTeams().map((t) => ({ id: t.id, name: t.name })) };
};

export const actions: Actions = { default: (event) => saveTelescope(event, event.params.telescopeId) };
