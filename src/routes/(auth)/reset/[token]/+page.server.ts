import { redirect } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import * as people from '$lib/server/people/people';
import { newPasswordField } from '$lib/validation';

export const load: PageServerLoad = ({ params }) => ({ valid: Boolean(people.findOpenReset(params.token)) });

const schema = z
	.object({ password: newPasswordField, confirm: z.string({ error: 'Repeat the password.' }) })
	.refine((v) => v.password === v.confirm, { path: ['confirm'], message: 'The two passwords differ.' });

export const actions: Actions = {
	default: async (event) => {
		const { data, form, failure } = await validateForm(event.request, schema);
		if (failure) return failure;
		try {
			await people.resetPassword(event.params.token, data.password);
		} catch (e) {
			return failFromError(form, e);
		}
		redirect(303, '/sign-in?reset=done');
	}
};
