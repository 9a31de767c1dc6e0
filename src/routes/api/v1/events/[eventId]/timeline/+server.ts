import { json } from '@sveltejs/kit';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { eventTimeline, parseTimelineQuery } from '$lib/server/closeout/timeline';

/**
 * GET the event's timeline, oldest first: `?kind=claim,pointing&team={teamId}&page=N` →
 * `{ eventId, sourceEventId, mergerTime, total, page, pageSize, pages, counts, teams, entries: [{ id, seq, at,
 * sinceMerger, kind, action, title, detail, actor, teamId, teamName, href, linkText }] }`. 400 for an unknown kind or team.
 */
export const GET = apiRoute(({ params, url }) => {
	requirePermission('events.view');
	const eventId = params.eventId ?? '';
	const timeline = eventTimeline(eventId, parseTimelineQuery(url.searchParams));
	if (!timeline) return apiError(404, 'not_found', `No event ${eventId}.`);
	return json(timeline);
});
