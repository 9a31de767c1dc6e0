import { fail } from '@sveltejs/kit';
import type { Actions, PageServerLoad } from './$types';
import { DomainError } from '$lib/server/platform/errors';
import * as notifications from '$lib/server/people/notifications';

/**
 * Public by design: the signed token in the path is the permission (one person, one kind of
 * e-mail). Opening the link only shows what would be switched off; a mail scanner that follows
 * it changes nothing. Confirming is a POST from this page.
 */
export const load: PageServerLoad = ({ params }) => {
	try {
		return { offer: notifications.unsubscribePreview(params.token), refusal: null };
	} catch (e) {
		if (!(e instanceof DomainError)) throw e;
		return { offer: null, refusal: e.message };
	}
};

export const actions: Actions = {
	default: ({ params }) => {
		try {
			return { done: notifications.unsubscribeWithToken(params.token) };
		} catch (e) {
			if (!(e instanceof DomainError)) throw e;
			return fail(e.status, { message: e.message });
		}
	}
};
