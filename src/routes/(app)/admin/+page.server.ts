import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { can, rolesOutOfReach } from '$lib/server/people/permissions';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { validateForm, failFromError, failWith } from '$lib/server/platform/forms';
import { actorOf } from '$lib/server/platform/realtime';
import * as people from '$lib/server/people/people';
import { listTeams } from '$lib/server/people/teams';
import { emailField, rolesField } from '$lib/validation';
import { ROLES_LIST, ROLE_LABELS } from '$lib/roles';
import type { Role } from '$lib/server/platform/db/schema';

export const load: PageServerLoad = ({ locals }) => {
	requirePermission('admin.view');
	return {
		people: people.listUsers(),
		invitations: people.listInvitations(),
		teams: listTeams().map((t) => ({ id: t.id, name: t.name })),
		grantableRoles: ROLES_LIST.filter((r) => rolesOutOfReach(locals.user!.roles, [r]).length === 0),
		canManagePeople: can({ user: locals.user }, 'people.manage'),
		canManageTokens: can({ user: locals.user }, 'tokens.manage'),
		canManageWebhooks: can({ user: locals.user }, 'webhooks.manage'),
		me: locals.user!.id
	};
};

const inviteSchema = z.object({ email: emailField, roles: rolesField, teamIds: z.array(z.string()).default([]) });
const rolesSchema = z.object({ userId: z.string().min(1), roles: rolesField });
const idSchema = z.object({ userId: z.string().min(1) });

/** Refuses (403, on the roles field) a grant or removal of a role above the person's own. */
function roleReachFailure(form: FormData, granterRoles: readonly Role[], changed: readonly Role[]) {
	const beyond = rolesOutOfReach(granterRoles, changed);
	if (beyond.length === 0) return null;
	const names = beyond.map((r) => ROLE_LABELS[r]).join(', ');
	const message = beyond.includes('admin')
		? `Only an administrator may grant or remove ${names}.`
		: `You may not grant or remove ${names}: it is above your own role.`;
	return failWith(form, { roles: message }, 403);
}

export const actions: Actions = {
	invite: async ({ request }) => {
		const user = requireUser('people.invite');
		const { data, form, failure } = await validateForm(request, inviteSchema, ['roles', 'teamIds']);
		if (failure) return failure;
		const refused = roleReachFailure(form, user.roles, data.roles);
		if (refused) return refused;
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
		const current = people.rolesOf(data.userId);
		const changed = [...data.roles.filter((r) => !current.includes(r)), ...current.filter((r) => !data.roles.includes(r))];
		const refused = roleReachFailure(form, user.roles, changed);
		if (refused) return refused;
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
