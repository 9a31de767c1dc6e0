import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { validateForm } from '$lib/server/platform/forms';
import { mailingList, setMailingList } from '$lib/server/closeout/mailing-list';
import { LIMITS } from '$lib/validation';

export const load: PageServerLoad = () => {
	requirePermission('settings.mailing-list');
	return { setting: mailingList() };
};

const schema = z.object({
	address: z
		.string()
		.trim()
		.toLowerCase()
		.max(LIMITS.emailMax, `At most ${LIMITS.emailMax} characters.`)
		.pipe(z.union([z.literal(''), z.email({ error: 'This is not a valid e-mail address. Leave it empty to send no records.' })]))
});

export const actions: Actions = {
	default: async ({ request }) => {
		const user = requireUser('settings.mailing-list');
		const { data, failure } = await validateForm(request, schema);
		if (failure) return failure;
		const saved = setMailingList(user, data.address);
		return { done: saved.address ? `Event records will be sent to ${saved.address} when an event is closed.` : 'No address: event records will not be sent.' };
	}
};
