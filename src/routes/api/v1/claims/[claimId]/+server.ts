import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { apiError, apiRoute, readJson } from '$lib/server/platform/api';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { mayUseTeam } from '$lib/server/people/scope';
import { complete, getClaim, reassign, release, start } from '$lib/server/coordination/claims';

const change = z.discriminatedUnion('action', [
	z.object({ action: z.literal('start') }),
	z.object({ action: z.literal('complete') }),
	z.object({ action: z.literal('release'), reason: z.string().max(500).optional() }),
	z.object({ action: z.literal('reassign'), telescopeId: z.string().min(1).max(80) })
]);

export const GET = apiRoute(({ params }) => {
	requirePermission('events.view');
	const c = getClaim(params.claimId ?? '');
	if (!c) return apiError(404, 'not_found', `No claim ${params.claimId}.`);
	return json({ claim: c });
});

/** PATCH `{ action: 'start' | 'complete' | 'release' | 'reassign', … }` → 200 `{ claim }`. */
export const PATCH = apiRoute(async ({ params, request }) => {
	const user = requireUser('claims.create');
	const body = await readJson(request, change);
	if (body.response) return body.response;
	const id = params.claimId ?? '';
	const existing = getClaim(id);
	if (!existing) return apiError(404, 'not_found', `No claim ${id}.`);
	const manages = can({ user }, 'claims.manage');
	if (body.data.action === 'reassign' && !manages) return apiError(403, 'forbidden', 'Only a coordinator may reassign a claim.');
	if (!mayUseTeam(user, existing.teamId)) return apiError(403, 'forbidden', 'Only the claiming team or a coordinator may change this claim.');
	const d = body.data;
	const row =
		d.action === 'start'
			? start(user, id)
			: d.action === 'complete'
				? complete(user, id)
				: d.action === 'release'
					? release(user, id, d.reason ?? '')
					: reassign(user, id, d.telescopeId);
	return json({ claim: row });
});
