import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { apiError, apiRoute, apiErrorFrom, readJson } from '$lib/server/platform/api';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { candidateRow } from '$lib/server/candidates/candidates';
import { classificationSummary, classifyCandidate, listClassifications } from '$lib/server/candidates/classifications';

/** GET `{ classifications, summary }` (the summary says whether they agree). */
export const GET = apiRoute(({ params }) => {
	requirePermission('events.view');
	const id = params.candidateId ?? '';
	if (!candidateRow(id)) return apiError(404, 'not_found', `No candidate ${id}.`);
	return json({ classifications: listClassifications(id), summary: classificationSummary(id) });
});

/**
 * POST `{ label, confidence, redshift?, notes?, spectrumId? }` — label one of kilonova, sn-ia, sn-ii,
 * sn-ibc, agn, stellar-flare, cv, asteroid, artefact, unrelated, unknown; confidence low | medium | high.
 * 201 `{ classification, summary }`; 422 with the message per field in `details`; 409 on a retracted event.
 */
export const POST = apiRoute(async ({ params, request }) => {
	const user = requireUser('candidates.classify');
	const body = await readJson(request, z.record(z.string(), z.unknown()));
	if (body.response) return body.response;
	try {
		return json(classifyCandidate(user, params.candidateId ?? '', body.data), { status: 201 });
	} catch (e) {
		return apiErrorFrom(e);
	}
});
