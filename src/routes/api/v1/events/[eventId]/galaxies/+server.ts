import { json } from '@sveltejs/kit';
import { eq } from 'drizzle-orm';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { db } from '$lib/server/platform/db';
import * as table from '$lib/server/platform/db/schema';
import { galaxiesResponse, STORED_GALAXIES } from '$lib/server/targeting/rankings';

/** GET the ranked galaxies of an event's current sky map: `{ galaxies: [{ rank, galaxyId, name, ra, dec, distance, score, probability, cumulative }] }`. */
export const GET = apiRoute(({ params, url }) => {
	requirePermission('events.view');
	const eventId = params.eventId ?? '';
	if (!db.select({ id: table.gwEvent.id }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get()) return apiError(404, 'not_found', `No event ${eventId}.`);
	const raw = url.searchParams.get('limit');
	const limit = raw === null ? 100 : Number(raw);
	if (!Number.isInteger(limit) || limit < 1 || limit > STORED_GALAXIES) return apiError(400, 'bad_request', `limit must be an integer from 1 to ${STORED_GALAXIES}.`);
	return json(galaxiesResponse(eventId, limit));
});
