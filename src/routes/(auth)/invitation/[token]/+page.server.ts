import { redirect } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import * as people from '$lib/server/people/people';
import { startSession } from '$lib/server/people/session-cookie';
import { nameField, newPasswordField } from '$lib/validation';
import { ROLE_LABELS } from '$lib/roles';

export const load: PageServerLoad = ({ params }) => {
	const inv = people.findOpenInvitation(params.token);
	if (!inv) return { invitation: null };
	return { invitation: { email: inv.email, roles: inv.roles.map((r) => ROLE_LABELS[r]) } };
};

const schema = z
	.object({ name: nameField, password: newPasswordField, confirm: z.string({ error: 'Repeat the password.' }) })
	.refine((v) => v.password === v.confirm, { path: ['confirm'], message: 'The two passwords differ.' });

export const actions: Actions = {
	default: async (event) => {
		const { data, form, failure } = await validateForm(event.request, schema);
		if (failure) return failure;
		try {
			const { userId } = await people.acceptInvitation(event.params.token, { name: data.name, password: data.password });
			startSession(event, userId);
		} catch (e) {
			return failFromError(form, e);
		}
		redirect(303, '/');
	}
};
