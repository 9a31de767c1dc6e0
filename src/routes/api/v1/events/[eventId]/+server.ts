import { json } from '@sveltejs/kit';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { getEvent } from '$lib/server/alerts/events';

/** GET one event: state, classification, latest sky-map summary, triage and notice history. */
export const GET = apiRoute(({ params }) => {
	requirePermission('events.view');
	const eventId = params.eventId ?? '';
	const event = getEvent(eventId);
	if (!event) return apiError(404, 'not_found', `No event ${eventId}.`);
	return json(event);
});
