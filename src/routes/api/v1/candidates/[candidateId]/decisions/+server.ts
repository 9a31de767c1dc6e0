import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { apiRoute, apiErrorFrom, readJson } from '$lib/server/platform/api';
import { requireUser } from '$lib/server/people/guard';
import { decideCandidate } from '$lib/server/candidates/decisions';

/**
 * POST a decision: `{ state: 'rejected', reason: 'asteroid' | 'known-variable' | 'artefact' | 'unrelated', note? }`,
 * `{ state: 'promoted', note? }` (for spectroscopy) or `{ state: 'open', note }` (reopen, saying why).
 * 201 `{ decision }`; 409 `same_state`; 422 with the message per field.
 */
export const POST = apiRoute(async ({ params, request }) => {
	const user = requireUser('candidates.decide');
	const body = await readJson(request, z.record(z.string(), z.unknown()));
	if (body.response) return body.response;
	try {
		return json({ decision: decideCandidate(user, params.candidateId ?? '', body.data) }, { status: 201 });
	} catch (e) {
		return apiErrorFrom(e);
	}
});
