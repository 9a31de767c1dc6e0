import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import { actorOf } from '$lib/server/platform/realtime';
import * as tokens from '$lib/server/people/tokens';
import { listUsers } from '$lib/server/people/people';
import { listTelescopes } from '$lib/server/people/telescopes';

export const load: PageServerLoad = () => {
	requirePermission('tokens.manage');
	return {
		tokens: tokens.listTokens(),
		people: listUsers().map((u) => ({ id: u.id, name: u.name })),
		telescopes: listTelescopes().map((t) => ({ id: t.id, name: t.name }))
	};
};

const issueSchema = z.object({
	name: z.string({ error: 'Name the token.' }).trim().min(1, 'Name the token.').max(60, 'At most 60 characters.'),
	owner: z
		.string({ error: 'Choose who holds it.' })
		.regex(/^(user|telescope):.+$/, 'Choose a person or a telescope.')
});

export const actions: Actions = {
	issue: async ({ request }) => {
		const user = requireUser('tokens.manage');
		const { data, form, failure } = await validateForm(request, issueSchema);
		if (failure) return failure;
		const [kind, id] = [data.owner.slice(0, data.owner.indexOf(':')), data.owner.slice(data.owner.indexOf(':') + 1)];
		try {
			const { secret } = tokens.issueToken(actorOf(user), {
				name: data.name,
				userId: kind === 'user' ? id : null,
				telescopeId: kind === 'telescope' ? id : null
			});
			return { issued: { name: data.name, secret } };
		} catch (e) {
			return failFromError(form, e, { field: 'owner' });
		}
	},
	revoke: async ({ request }) => {
		const user = requireUser('tokens.manage');
		const { data, failure } = await validateForm(request, z.object({ tokenId: z.string().min(1) }));
		if (failure) return failure;
		tokens.revokeToken(actorOf(user), data.tokenId);
		return { done: 'Token revoked.' };
	}
};
