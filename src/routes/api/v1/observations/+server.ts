import { json } from '@sveltejs/kit';
import { apiError, apiRoute, jsonListResponse, readJson } from '$lib/server/platform/api';
import { reporterOf } from '$lib/server/people/tokens';
import { requirePermission } from '$lib/server/people/guard';
import { observationInput, parseObservationCsv, report, reportMany } from '$lib/server/coordination/observations';
import { API_OBSERVATION_CSV_MAX_BYTES } from '$lib/limits';

/**
 * POST a pointing `{ eventId, observedAt, raDeg, decDeg | fieldId, filter, exposureS, limitingMag, seeingArcsec?, notes? }`.
 * With a telescope token the telescope is the token's; a person gives `telescopeId` (one of their teams').
 * 201 `{ observation, completedClaimIds }`; 422 with `details` `{ field: message }` on bad input.
 * A `text/csv` body (`?eventId=…&telescopeId=…`) stores all rows or none: 201 `{ results }`, or
 * 422 with `details` `[{ line, message }]`.
 */
export const POST = apiRoute(async ({ request, url }) => {
	const principal = requirePermission('observations.report');
	const reporter = reporterOf(principal, request);
	const type = (request.headers.get('content-type') ?? '').split(';')[0].trim().toLowerCase();
	if (type === 'text/csv') {
		const text = await request.text();
		if (text.length > API_OBSERVATION_CSV_MAX_BYTES) return apiError(413, 'too_large', `A CSV upload may be at most ${API_OBSERVATION_CSV_MAX_BYTES} bytes.`);
		const eventId = url.searchParams.get('eventId') ?? '';
		const telescopeId = url.searchParams.get('telescopeId') || undefined;
		const parsed = await parseObservationCsv(text);
		if (parsed.errors.length) return apiError(422, 'invalid_csv', `${parsed.errors.length} problem(s); nothing stored.`, parsed.errors);
		const out = await reportMany(reporter, parsed.rows.map((r) => ({ ...r, eventId, telescopeId })), 'csv', { lines: parsed.lines });
		if (out.errors.length) return apiError(422, 'invalid_csv', `${out.errors.length} problem(s); nothing stored.`, out.errors);
		return jsonListResponse('results', out.results, 201);
	}
	const body = await readJson(request, observationInput);
	if (body.response) return body.response;
	const out = report(reporter, body.data, 'api');
	return json(out, { status: 201 });
});
