import { json } from '@sveltejs/kit';
import { apiError, apiRoute, apiErrorFrom } from '$lib/server/platform/api';
import { requireUser } from '$lib/server/people/guard';
import { releaseCandidate, takeCandidate } from '$lib/server/candidates/takers';

/**
 * POST `{ note? }`: take the candidate for a spectrum. 201 `{ take }`; 409 `taken` naming the
 * person who holds it (also `details.holder`); 409 on a retracted event or a rejected candidate.
 */
export const POST = apiRoute(async ({ params, request }) => {
	const user = requireUser('candidates.spectroscopy');
	// The body is optional here: an empty one takes the candidate without a note.
	const text = await request.text();
	let body: unknown = {};
	if (text.trim()) {
		try {
			body = JSON.parse(text);
		} catch {
			return apiError(400, 'bad_json', 'The body is not valid JSON.');
		}
	}
	try {
		return json({ take: takeCandidate(user, params.candidateId ?? '', body) }, { status: 201 });
	} catch (e) {
		return apiErrorFrom(e);
	}
});

/** DELETE: release the open take (its holder or a coordinator). 200 `{ take }`; 404 when nobody holds it. */
export const DELETE = apiRoute(({ params }) => {
	const user = requireUser('candidates.spectroscopy');
	try {
		return json({ take: releaseCandidate(user, params.candidateId ?? '') });
	} catch (e) {
		return apiErrorFrom(e);
	}
});
