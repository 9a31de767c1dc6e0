import { redirect } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { validateForm, failWith } from '$lib/server/platform/forms';
import { signIn } from '$lib/server/people/sign-in';
import { startSession, safeNext } from '$lib/server/people/session-cookie';
import { emailField } from '$lib/validation';

export const load: PageServerLoad = ({ locals, url }) => {
	if (locals.user) redirect(303, safeNext(url.searchParams.get('next')));
	return { reset: url.searchParams.get('reset') === 'done' };
};

const schema = z.object({
	email: emailField,
	password: z.string({ error: 'Enter your password.' }).min(1, 'Enter your password.').max(200, 'At most 200 characters.')
});

function limitedMessage(by: 'client' | 'account' | undefined, waitS: number): string {
	const wait = waitS < 90 ? `${waitS} second${waitS === 1 ? '' : 's'}` : `${Math.ceil(waitS / 60)} minutes`;
	return by === 'account'
		? `Several wrong passwords were tried for this account. Wait ${wait}, then try again.`
		: `Too many failed sign-ins from your network address. Try again in ${wait}.`;
}

export const actions: Actions = {
	default: async (event) => {
		const { data, form, failure } = await validateForm(event.request, schema);
		if (failure) return failure;
		const result = await signIn(data.email, data.password, event.getClientAddress());
		if (!result.ok) {
			if (result.reason === 'limited') return failWith(form, {}, 429, limitedMessage(result.limitedBy, result.retryAfterS ?? 60));
			if (result.reason === 'disabled') return failWith(form, {}, 403, 'This account is disabled. Ask an administrator.');
			return failWith(form, { password: 'Wrong e-mail or password.' });
		}
		startSession(event, result.userId);
		redirect(303, safeNext(event.url.searchParams.get('next')));
	}
};
