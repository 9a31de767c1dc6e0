import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { validateForm, failWith } from '$lib/server/platform/forms';
import { config } from '$lib/server/platform/config';
import * as calendar from '$lib/server/duty/calendar';

export const load: PageServerLoad = () => {
	const user = requireUser('calendar.own');
	return {
		feeds: calendar.feedsOf(user.id),
		mayHaveRoster: can({ user }, 'calendar.roster'),
		siteTimeZone: config.siteTimeZone
	};
};

const scopeSchema = z.object({ scope: z.enum(['mine', 'roster'], { error: 'Choose your shifts or the whole roster.' }) });

function permissionFor(scope: 'mine' | 'roster') {
	return scope === 'roster' ? ('calendar.roster' as const) : ('calendar.own' as const);
}

export const actions: Actions = {
	create: async ({ request }) => {
		requireUser('calendar.own');
		const { data, form, failure } = await validateForm(request, scopeSchema);
		if (failure) return failure;
		const user = requireUser(permissionFor(data.scope));
		const made = calendar.createFeedFor(user.id, data.scope);
		if (!made) return failWith(form, {}, 403, 'Your role does not allow this calendar.');
		return { done: 'New calendar address made. Copy it now: it is shown only once. Any earlier address for it no longer works.', scope: data.scope, url: made.url };
	},
	revoke: async ({ request }) => {
		requireUser('calendar.own');
		const { data, failure } = await validateForm(request, scopeSchema);
		if (failure) return failure;
		const user = requireUser(permissionFor(data.scope));
		const revoked = calendar.revokeFeed(user.id, data.scope);
		return { done: revoked ? 'Calendar address revoked: calendars using it will stop updating.' : 'There was no address to revoke.', scope: data.scope };
	}
};
