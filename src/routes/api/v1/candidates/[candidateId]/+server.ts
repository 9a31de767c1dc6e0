import { json } from '@sveltejs/kit';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { getCandidateDetailById } from '$lib/server/candidates/detail';

/**
 * GET one candidate with everything about it: `{ candidate, event, hoursSinceMerger, decision,
 * decisions, vetting, photometry, spectra, take, takes, classifications, classificationSummary,
 * discussion, history }`. The vetting is recomputed first when one of its inputs changed.
 */
export const GET = apiRoute(({ params }) => {
	requirePermission('events.view');
	const detail = getCandidateDetailById(params.candidateId ?? '');
	if (!detail) return apiError(404, 'not_found', `No candidate ${params.candidateId}.`);
	return json(detail);
});
