import { json } from '@sveltejs/kit';
import { apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { eventReport } from '$lib/server/closeout/report';

/**
 * GET the event's report, made now from the stored rows: `{ event, times, delaysS, notices,
 * coverage: { sky, galaxies, byTeam, byFilter, curve, … }, counts, kilonova, telescopes,
 * candidates, participants, annotation }`; probabilities are fractions 0–1, times ISO 8601 UTC.
 */
export const GET = apiRoute(async ({ params }) => {
	requirePermission('events.view');
	return json(await eventReport(params.eventId ?? ''));
});
