import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { can } from '$lib/server/people/permissions';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import { actorOf } from '$lib/server/platform/realtime';
import * as people from '$lib/server/people/people';
import { listTeams } from '$lib/server/people/teams';
import { emailField, rolesField } from '$lib/validation';

export const load: PageServerLoad = ({ locals }) => {
	requirePermission('admin.view');
	return {
		people: people.listUsers(),
		invitations: people.listInvitations(),
		teams: listTeams().map((t) => ({ id: t.id, name: t.name })),
		canManagePeople: can({ user: locals.user }, 'people.manage'),
		canManageTokens: can({ user: locals.user }, 'tokens.manage'),
		me: locals.user!.id
	};
};

const inviteSchema = z.object({ email: emailField, roles: rolesField, teamIds: z.array(z.string()).default([]) });
const rolesSchema = z.object({ userId: z.string().min(1), roles: rolesField });
const idSchema = z.object({ userId: z.string().min(1) });

export const actions: Actions = {
	invite: async ({ request }) => {
		const user = requireUser('people.invite');
		const { data, form, failure } = await validateForm(request, inviteSchema, ['roles', 'teamIds']);
		if (failure) return failure;
		try {
			await people.invite(actorOf(user), data);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: `Invitation sent to ${data.email}.` };
	},
	withdraw: async ({ request }) => {
		const user = requireUser('people.invite');
		const { data, failure } = await validateForm(request, z.object({ invitationId: z.string().min(1) }));
		if (failure) return failure;
		people.revokeInvitation(actorOf(user), data.invitationId);
		return { done: 'Invitation withdrawn.' };
	},
	roles: async ({ request }) => {
		const user = requireUser('people.manage');
		const { data, form, failure } = await validateForm(request, rolesSchema, ['roles']);
		if (failure) return failure;
		try {
			people.setRoles(actorOf(user), data.userId, data.roles);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'Roles saved.' };
	},
	disable: async ({ request }) => {
		const user = requireUser('people.manage');
		const { data, form, failure } = await validateForm(request, idSchema);
		if (failure) return failure;
		try {
			people.setDisabled(actorOf(user), data.userId, true);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'Account disabled and signed out.' };
	},
	enable: async ({ request }) => {
		const user = requireUser('people.manage');
		const { data, failure } = await validateForm(request, idSchema);
		if (failure) return failure;
		people.setDisabled(actorOf(user), data.userId, false);
		return { done: 'Account enabled.' };
	}
};
