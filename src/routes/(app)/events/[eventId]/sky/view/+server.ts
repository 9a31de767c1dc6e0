import { error } from '@sveltejs/kit';
import type { RequestHandler } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { eventSkyView } from '$lib/server/closeout/event-page';

/**
 * GET the event page's sky view now, for the signed-in viewer: `{ sun, moon, contours, targets,
 * footprints, footprintCount, candidates, raster: null, rasterUrl }` (SkyViewData, event-sky.ts).
 * The page asks with `?v=` set to the event's version, so a change is a new address; the answer
 * itself is not kept by the browser (the Sun and Moon move). 401 signed out, 403 without
 * events.view, 404 for an unknown event.
 */
export const GET: RequestHandler = async ({ params }) => {
	const { user } = requirePermission('events.view');
	const body = await eventSkyView(params.eventId, user);
	if (body === null) error(404, 'No such event.');
	return new Response(body, { headers: { 'content-type': 'application/json', 'cache-control': 'private, no-store', vary: 'cookie' } });
};
