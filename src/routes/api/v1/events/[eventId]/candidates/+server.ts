import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { apiError, apiRoute, readJson } from '$lib/server/platform/api';
import { reporterOf } from '$lib/server/people/tokens';
import { eventExists } from '$lib/server/alerts/events';
import { requirePermission } from '$lib/server/people/guard';
import { listCandidates, reportCandidate, type CandidateInput } from '$lib/server/candidates/candidates';

/** GET the event's candidates, newest report first: `{ candidates: [...] }`. */
export const GET = apiRoute(({ params }) => {
	requirePermission('events.view');
	const eventId = params.eventId ?? '';
	if (!eventExists(eventId)) return apiError(404, 'not_found', `No event ${eventId}.`);
	return json({ candidates: listCandidates(eventId) });
});

/**
 * POST a candidate `{ name, raDeg, decDeg, positionErrArcsec?, discoveredAt, magnitude, magnitudeErr?, filter, telescopeId?, teamId?, notes? }`
 * (`positionErrArcsec`: the radius of the position's uncertainty, more than 0 and at most POSITION_ERR_ARCSEC_MAX in limits.ts, 60)
 * with a person's or a telescope's bearer token (or a session). 201 `{ candidate, warning }`, where
 * `warning` names an earlier candidate within 2″ (stored all the same). Errors
 * `{ error: { code, message, details? } }` (details: the message per field, as for observations): 403, 404, 409 (name taken, naming the team; event retracted), 422.
 */
export const POST = apiRoute(async ({ params, request }) => {
	const principal = requirePermission('candidates.report');
	const body = await readJson(request, z.record(z.string(), z.unknown()));
	if (body.response) return body.response;
	const out = reportCandidate(reporterOf(principal, request), { ...body.data, eventId: params.eventId ?? '' } as CandidateInput);
	return json(out, { status: 201 });
});
