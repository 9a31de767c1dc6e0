import { json } from '@sveltejs/kit';
import { apiRoute, readJson } from '$lib/server/platform/api';
import { requireUser } from '$lib/server/people/guard';
import { reopenEvent, reopenInput } from '$lib/server/closeout/close';

/**
 * POST `{ note? }` (coordinators; an empty body is `{}`): 200 with the event as `GET /api/v1/events/{id}`
 * gives it. 403 for others, 404, 409 `not_closed`, 400 bad JSON, 422 a note too long.
 */
export const POST = apiRoute(async ({ params, request }) => {
	const user = requireUser('events.close');
	const eventId = params.eventId ?? '';
	if ((await request.clone().text()).trim() === '') return json(reopenEvent(user, eventId, {}));
	const body = await readJson(request, reopenInput);
	if (body.response) return body.response;
	return json(reopenEvent(user, eventId, body.data));
});
