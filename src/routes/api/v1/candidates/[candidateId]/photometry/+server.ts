import { json } from '@sveltejs/kit';
import { apiError, apiRoute, apiErrorFrom } from '$lib/server/platform/api';
import { reporterOf } from '$lib/server/people/tokens';
import { requirePermission } from '$lib/server/people/guard';
import { candidateRow } from '$lib/server/candidates/candidates';
import { addPhotometryCsv, addPhotometryRows, listPhotometry } from '$lib/server/candidates/photometry';

const MAX_BYTES = 2 * 1024 * 1024;

/** GET the candidate's photometry, oldest first: `{ photometry: [...] }`. */
export const GET = apiRoute(({ params }) => {
	requirePermission('events.view');
	const id = params.candidateId ?? '';
	if (!candidateRow(id)) return apiError(404, 'not_found', `No candidate ${id}.`);
	return json({ photometry: listPhotometry(id) });
});

/**
 * POST photometry with a session, a person's token or a telescope's token. The content type decides:
 * `text/csv` — header `time,filter,mag,mag_err,limit`; problems in `details` as `[{ line, message }]`;
 * JSON — `{ rows: [{ time, filter, mag?, mag_err?, limit?, observationId? }] }`; problems as `[{ row, message }]`.
 * All rows or none: 201 `{ added, photometry, vetting }`; 422 `invalid_photometry`, nothing stored;
 * 409 on a retracted event or a concurrent upload of the same measurements; 413 over 2 MB.
 */
export const POST = apiRoute(async ({ params, request }) => {
	const principal = requirePermission('candidates.photometry');
	const reporter = reporterOf(principal, request);
	const type = (request.headers.get('content-type') ?? '').split(';')[0].trim().toLowerCase();
	const text = await request.text();
	if (text.length > MAX_BYTES) return apiError(413, 'too_large', `A photometry upload may be at most ${MAX_BYTES / 1024 / 1024} MB.`);
	try {
		if (type === 'text/csv') return json(await addPhotometryCsv(reporter, params.candidateId ?? '', text), { status: 201 });
		let body: unknown;
		try {
			body = JSON.parse(text);
		} catch {
			return apiError(400, 'bad_json', 'The body is not valid JSON (send text/csv for a CSV file).');
		}
		return json(addPhotometryRows(reporter, params.candidateId ?? '', body), { status: 201 });
	} catch (e) {
		return apiErrorFrom(e);
	}
});
