import { z } from 'zod';
import type { Actions } from './$types';
import { validateForm, failWith } from '$lib/server/platform/forms';
import { requestPasswordReset } from '$lib/server/people/people';
import { emailField } from '$lib/validation';

const minutes = (s: number) => Math.max(1, Math.ceil(s / 60));

export const actions: Actions = {
	default: async (event) => {
		const { data, form, failure } = await validateForm(event.request, z.object({ email: emailField }));
		if (failure) return failure;
		const result = await requestPasswordReset(data.email, new Date(), event.getClientAddress());
		if (!result.ok) {
			const wait = minutes(result.retryAfterS);
			return failWith(
				form,
				{},
				429,
				result.reason === 'address'
					? `Several links were asked for this address recently. Use the newest one, or try again in ${wait} minute${wait === 1 ? '' : 's'}.`
					: `Too many reset requests from your network address. Try again in ${wait} minute${wait === 1 ? '' : 's'}.`
			);
		}
		return { sent: true, email: data.email };
	}
};
