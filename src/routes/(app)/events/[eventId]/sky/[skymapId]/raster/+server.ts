import { error } from '@sveltejs/kit';
import type { RequestHandler } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { eventSkyRaster } from '$lib/server/targeting/event-sky';
import { SKY_RASTER_MAX_AGE_S } from '$lib/limits';

/**
 * GET one sky map's packed display raster for the event page's sky view:
 * `{ width, height, peakDensityPerSr, density, level }` (base64 bytes, sky-view/raster-image.ts).
 * A map's raster never changes under its id, so the browser keeps it (private: signed-in only)
 * and revalidates with its ETag. 401 signed out, 403 without events.view, 404 for a map that is
 * not the event's or has no raster.
 */
export const GET: RequestHandler = ({ params, request }) => {
	requirePermission('events.view');
	const found = eventSkyRaster(params.eventId, params.skymapId);
	if (!found) error(404, 'No such sky map for this event.');
	const headers = { 'cache-control': `private, max-age=${SKY_RASTER_MAX_AGE_S}`, etag: found.etag, vary: 'cookie' };
	if (request.headers.get('if-none-match') === found.etag) return new Response(null, { status: 304, headers });
	return new Response(JSON.stringify(found.raster), { headers: { ...headers, 'content-type': 'application/json' } });
};
