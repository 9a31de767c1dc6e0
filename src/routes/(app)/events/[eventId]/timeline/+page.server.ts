import { error } from '@sveltejs/kit';
import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { DomainError } from '$lib/server/platform/errors';
import { eventTimeline, parseTimelineQuery } from '$lib/server/closeout/timeline';

export const load: PageServerLoad = ({ params, url, depends }) => {
	requirePermission('events.view');
	depends('app:timeline');
	try {
		const timeline = eventTimeline(params.eventId, parseTimelineQuery(url.searchParams));
		if (!timeline) error(404, 'No such event.');
		return { timeline };
	} catch (e) {
		if (e instanceof DomainError) error(e.status, e.message);
		throw e;
	}
};
