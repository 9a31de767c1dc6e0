import { json } from '@sveltejs/kit';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { eventExists } from '$lib/server/alerts/events';
import { getTelescope } from '$lib/server/people/telescopes';
import { fieldsResponse } from '$lib/server/targeting/rankings';

/** GET the ranked survey fields of an event, for one telescope (`?telescope=ID`) or every wide-field one. */
export const GET = apiRoute(({ params, url }) => {
	requirePermission('events.view');
	const eventId = params.eventId ?? '';
	if (!eventExists(eventId)) return apiError(404, 'not_found', `No event ${eventId}.`);
	const telescopeId = url.searchParams.get('telescope') || null;
	if (telescopeId && !getTelescope(telescopeId))
		return apiError(404, 'not_found', `No telescope ${telescopeId}.`);
	return json(fieldsResponse(eventId, telescopeId));
});
