import { json } from '@sveltejs/kit';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { eventExists } from '$lib/server/alerts/events';
import { API_GALAXIES_DEFAULT_LIMIT } from '$lib/limits';
import { galaxiesResponse, STORED_GALAXIES } from '$lib/server/targeting/rankings';

/** GET the ranked galaxies of an event's current sky map: `{ galaxies: [{ rank, galaxyId, name, ra, dec, distance, score, probability, cumulative }] }`. */
export const GET = apiRoute(({ params, url }) => {
	requirePermission('events.view');
	const eventId = params.eventId ?? '';
	if (!eventExists(eventId)) return apiError(404, 'not_found', `No event ${eventId}.`);
	const raw = url.searchParams.get('limit');
	const limit = raw === null ? API_GALAXIES_DEFAULT_LIMIT : Number(raw);
	if (!Number.isInteger(limit) || limit < 1 || limit > STORED_GALAXIES) return apiError(400, 'bad_request', `limit must be an integer from 1 to ${STORED_GALAXIES}.`);
	return json(galaxiesResponse(eventId, limit));
});
