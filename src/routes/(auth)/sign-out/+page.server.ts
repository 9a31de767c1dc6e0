import { redirect } from '@sveltejs/kit';
import type { Actions, PageServerLoad } from './$types';
import { invalidateSession, deleteSessionTokenCookie } from '$lib/server/people/auth';

export const load: PageServerLoad = () => redirect(303, '/');

export const actions: Actions = {
	default: (event) => {
		if (event.locals.session) invalidateSession(event.locals.session.id);
		deleteSessionTokenCookie(event);
		redirect(303, '/');
	}
};
