import { error } from '@sveltejs/kit';
import { z } from 'zod';
import type { PageServerLoad } from './$types';
import { requireUser } from '$lib/server/people/guard';
import { getEvent } from '$lib/server/alerts/events';
import { teamWork } from '$lib/server/coordination/team-work';

/** `?pointings=N`: which page of the pointings (anything else shows the first). */
const pageParam = z.coerce.number().int().min(1).max(1_000_000).catch(1);

export const load: PageServerLoad = ({ params, url, depends }) => {
	const user = requireUser('events.view');
	depends('app:our-work');
	const event = getEvent(params.eventId);
	if (!event) error(404, 'No such event.');
	const pointingsPage = pageParam.parse(url.searchParams.get('pointings') ?? undefined);
	return { event: { id: event.eventId, sourceEventId: event.sourceEventId, state: event.state }, work: teamWork(event.eventId, user, { pointingsPage }) };
};
