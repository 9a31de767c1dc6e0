import { error } from '@sveltejs/kit';
import type { PageServerLoad } from './$types';
import { requireUser } from '$lib/server/people/guard';
import { getEvent } from '$lib/server/alerts/events';
import { teamWork } from '$lib/server/coordination/team-work';

export const load: PageServerLoad = ({ params, depends }) => {
	const user = requireUser('events.view');
	depends('app:our-work');
	const event = getEvent(params.eventId);
	if (!event) error(404, 'No such event.');
	return { event: { id: event.eventId, sourceEventId: event.sourceEventId, state: event.state }, work: teamWork(event.eventId, user) };
};
