import { json } from '@sveltejs/kit';
import { apiError, apiRoute, apiErrorFrom } from '$lib/server/platform/api';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { currentThresholds, setThresholds } from '$lib/server/candidates/vetting';

/** GET the kilonova-likeness thresholds in use, the coordinators' changes, the defaults, and each rule in words with its source. */
export const GET = apiRoute(() => {
	requirePermission('events.view');
	return json(currentThresholds());
});

/**
 * PUT the coordinators' changes (any section in part, e.g. `{ "fastFade": { "minRateMagPerDay": 0.4 } }`;
 * `{}` returns to the defaults). 200 with the new view; 422 naming every problem. Every candidate of the
 * events not retracted is vetted again.
 */
export const PUT = apiRoute(async ({ request }) => {
	const user = requireUser('kilonova.thresholds');
	let body: unknown;
	try {
		body = JSON.parse(await request.text());
	} catch {
		return apiError(400, 'bad_json', 'The body is not valid JSON.');
	}
	try {
		return json(setThresholds(user, body));
	} catch (e) {
		return apiErrorFrom(e);
	}
});
