import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { apiError, apiRoute, readJson } from '$lib/server/platform/api';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { CLAIM_TARGET_KINDS } from '$lib/server/platform/db/schema';
import { eventExists } from '$lib/server/alerts/events';
import { claim, listClaims } from '$lib/server/coordination/claims';

const claimBody = z.object({
	targetKind: z.enum(CLAIM_TARGET_KINDS),
	targetId: z.string().trim().min(1).max(80),
	filter: z.string().max(20).optional(),
	epoch: z.number().int().min(1).max(100).optional(),
	telescopeId: z.string().min(1).max(80),
	note: z.string().max(500).optional()
});

/** GET the event's claims: `{ claims: [...] }` (`?open=1`: only claimed/observing). */
export const GET = apiRoute(({ params, url }) => {
	requirePermission('events.view');
	const eventId = params.eventId ?? '';
	if (!eventExists(eventId)) return apiError(404, 'not_found', `No event ${eventId}.`);
	return json({ claims: listClaims(eventId, { openOnly: url.searchParams.get('open') === '1' }) });
});

/** POST a claim: 201 `{ claim }`, or 409 `{ error: { code: 'taken', message: 'Already taken by <team> (<telescope>) …' } }`. */
export const POST = apiRoute(async ({ params, request }) => {
	const user = requireUser('claims.create');
	const body = await readJson(request, claimBody);
	if (body.response) return body.response;
	const row = claim(user, { eventId: params.eventId ?? '', ...body.data });
	return json({ claim: row }, { status: 201 });
});
