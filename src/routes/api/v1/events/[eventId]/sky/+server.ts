import { json } from '@sveltejs/kit';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { skyAt } from '$lib/server/closeout/sky-replay';

/**
 * GET the sky view as it stood at `?at=ISO-8601`: `{ at, skymap: { skymapId, noticeKind, receivedAt } | null,
 * rankingIsLater, sky, counts: { footprints, openClaims, candidates }, coverage: { union, errorBound } | null, computeMs }`.
 * 400 when `at` is missing, not a time, or outside the event's range (first notice to close or now).
 */
export const GET = apiRoute(async ({ params, url, locals }) => {
	requirePermission('events.view');
	const eventId = params.eventId ?? '';
	const raw = url.searchParams.get('at');
	const at = raw ? new Date(raw) : null;
	if (!raw || !at || Number.isNaN(at.getTime())) return apiError(400, 'bad_request', 'Give the moment as at=YYYY-MM-DDTHH:MM:SSZ.');
	const found = await skyAt(eventId, at, locals.user ?? null);
	if (!found) return apiError(404, 'not_found', `No event ${eventId}.`);
	return json(found);
});
