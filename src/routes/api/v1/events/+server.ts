import { json } from '@sveltejs/kit';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { listEvents } from '$lib/server/alerts/events';
import { EVENT_STATES } from '$lib/server/platform/db/schema';

/** GET every event, newest first; `?state=active|retracted|closed` narrows the list. */
export const GET = apiRoute(({ url }) => {
	requirePermission('events.view');
	const state = url.searchParams.get('state');
	if (state !== null && !(EVENT_STATES as readonly string[]).includes(state))
		return apiError(400, 'bad_request', `state must be one of ${EVENT_STATES.join(', ')}.`);
	return json({ events: listEvents({ state: (state as (typeof EVENT_STATES)[number] | null) ?? undefined }) });
});
