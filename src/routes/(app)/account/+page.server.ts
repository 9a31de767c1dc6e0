import { redirect } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requireUser } from '$lib/server/people/guard';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import * as auth from '$lib/server/people/auth';
import * as people from '$lib/server/people/people';
import { newPasswordField } from '$lib/validation';

export const load: PageServerLoad = ({ locals }) => {
	const user = requireUser('account.manage');
	const current = locals.session?.id;
	return {
		sessions: auth
			.listSessions(user.id)
			.map((s) => ({ ...s, current: s.id === current, id: s.id.slice(0, 12) }))
			.sort((a, b) => Number(b.current) - Number(a.current))
	};
};

const passwordSchema = z
	.object({
		currentPassword: z.string({ error: 'Enter your current password.' }).min(1, 'Enter your current password.'),
		password: newPasswordField,
		confirm: z.string({ error: 'Repeat the password.' })
	})
	.refine((v) => v.password === v.confirm, { path: ['confirm'], message: 'The two passwords differ.' });

export const actions: Actions = {
	password: async ({ request, locals }) => {
		const user = requireUser('account.manage');
		const { data, form, failure } = await validateForm(request, passwordSchema);
		if (failure) return failure;
		try {
			await people.changePassword(user.id, data.currentPassword, data.password, locals.session!.id);
		} catch (e) {
			return failFromError(form, e, { field: 'currentPassword' });
		}
		return { done: 'Password changed. Your other sessions were signed out.' };
	},
	signOutOthers: ({ locals }) => {
		const user = requireUser('account.manage');
		const n = auth.invalidateUserSessions(user.id, locals.session?.id);
		return { done: `Signed out ${n} other session${n === 1 ? '' : 's'}.` };
	},
	signOutEverywhere: (event) => {
		const user = requireUser('account.manage');
		auth.invalidateUserSessions(user.id);
		auth.deleteSessionTokenCookie(event);
		redirect(303, '/sign-in');
	}
};
