import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { can } from '$lib/server/people/permissions';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import { actorOf } from '$lib/server/platform/realtime';
import * as teams from '$lib/server/people/teams';
import { listUsers } from '$lib/server/people/people';

export const load: PageServerLoad = ({ locals }) => {
	requirePermission('teams.view');
	const canManage = can({ user: locals.user }, 'teams.manage');
	return {
		teams: teams.listTeams(),
		canManage,
		people: canManage ? listUsers().map((u) => ({ id: u.id, name: u.name })) : []
	};
};

const teamSchema = z.object({
	name: z.string({ error: 'Enter a name.' }).trim().min(1, 'Enter a name.').max(60, 'At most 60 characters.'),
	region: z.string({ error: 'Enter a region.' }).trim().min(1, 'Enter a region.').max(60, 'At most 60 characters.'),
	description: z.string().trim().max(500, 'At most 500 characters.').default('')
});
const memberSchema = z.object({
	teamId: z.string().min(1, 'Choose a team.'),
	userId: z.string({ error: 'Choose a person.' }).min(1, 'Choose a person.')
});

export const actions: Actions = {
	create: async ({ request }) => {
		const user = requireUser('teams.manage');
		const { data, form, failure } = await validateForm(request, teamSchema);
		if (failure) return failure;
		try {
			teams.createTeam(actorOf(user), data);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'Team created.' };
	},
	addMember: async ({ request }) => {
		const user = requireUser('teams.manage');
		const { data, form, failure } = await validateForm(request, memberSchema);
		if (failure) return failure;
		try {
			teams.addMember(actorOf(user), data.teamId, data.userId);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'Member added.' };
	},
	removeMember: async ({ request }) => {
		const user = requireUser('teams.manage');
		const { data, failure } = await validateForm(request, memberSchema);
		if (failure) return failure;
		teams.removeMember(actorOf(user), data.teamId, data.userId);
		return { done: 'Member removed.' };
	}
};
