import { json } from '@sveltejs/kit';
import { apiRoute, readJson } from '$lib/server/platform/api';
import { requireUser } from '$lib/server/people/guard';
import { closeEvent, closeInput } from '$lib/server/closeout/close';

/**
 * POST `{ reason: search-complete|retracted|not-pursued|counterpart-found, note? }` (coordinators):
 * 200 with the event as `GET /api/v1/events/{id}` gives it (`state: 'closed'`, `closure`); open claims
 * and spectrum takes are released. 403 for others, 404, 409 `already_closed`, 400 bad JSON, 422 bad fields.
 */
export const POST = apiRoute(async ({ params, request }) => {
	const user = requireUser('events.close');
	const body = await readJson(request, closeInput);
	if (body.response) return body.response;
	return json(closeEvent(user, params.eventId ?? '', body.data).event);
});
