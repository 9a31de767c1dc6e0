import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { apiError, apiRoute, apiErrorFrom, readJson } from '$lib/server/platform/api';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { candidateRow } from '$lib/server/candidates/candidates';
import { addComment, listComments } from '$lib/server/candidates/discussion';

/** GET the discussion, oldest first: `{ comments: [...] }`. */
export const GET = apiRoute(({ params }) => {
	requirePermission('events.view');
	const id = params.candidateId ?? '';
	if (!candidateRow(id)) return apiError(404, 'not_found', `No candidate ${id}.`);
	return json({ comments: listComments(id) });
});

/** POST `{ body }` (at most 4000 characters): 201 `{ comment }`. */
export const POST = apiRoute(async ({ params, request }) => {
	const user = requireUser('candidates.discuss');
	const body = await readJson(request, z.record(z.string(), z.unknown()));
	if (body.response) return body.response;
	try {
		return json({ comment: addComment(user, params.candidateId ?? '', body.data) }, { status: 201 });
	} catch (e) {
		return apiErrorFrom(e);
	}
});
