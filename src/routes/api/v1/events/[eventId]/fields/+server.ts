import { json } from '@sveltejs/kit';
import { eq } from 'drizzle-orm';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { db } from '$lib/server/platform/db';
import * as table from '$lib/server/platform/db/schema';
import { fieldsResponse } from '$lib/server/targeting/rankings';

/** GET the ranked survey fields of an event, for one telescope (`?telescope=ID`) or every wide-field one. */
export const GET = apiRoute(({ params, url }) => {
	requirePermission('events.view');
	const eventId = params.eventId ?? '';
	if (!db.select({ id: table.gwEvent.id }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get()) return apiError(404, 'not_found', `No event ${eventId}.`);
	const telescopeId = url.searchParams.get('telescope') || null;
	if (telescopeId && !db.select({ id: table.telescope.id }).from(table.telescope).where(eq(table.telescope.id, telescopeId)).get())
		return apiError(404, 'not_found', `No telescope ${telescopeId}.`);
	return json(fieldsResponse(eventId, telescopeId));
});
