import { z } from 'zod';
import type { Actions } from './$types';
import { validateForm } from '$lib/server/platform/forms';
import { requestPasswordReset } from '$lib/server/people/people';
import { emailField } from '$lib/validation';

export const actions: Actions = {
	default: async (event) => {
		const { data, failure } = await validateForm(event.request, z.object({ email: emailField }));
		if (failure) return failure;
		await requestPasswordReset(data.email);
		return { sent: true, email: data.email };
	}
};
