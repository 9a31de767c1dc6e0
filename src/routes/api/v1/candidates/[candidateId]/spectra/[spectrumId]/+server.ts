import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { spectrumFile } from '$lib/server/candidates/spectra';

/** GET the stored spectrum file as it was uploaded. */
export const GET = apiRoute(({ params }) => {
	requirePermission('events.view');
	const f = spectrumFile(params.candidateId ?? '', params.spectrumId ?? '');
	if (!f) return apiError(404, 'not_found', `No spectrum ${params.spectrumId} of candidate ${params.candidateId}.`);
	const type = f.format === 'ascii' ? 'text/plain; charset=utf-8' : 'application/fits';
	const safeName = f.originalName.replace(/[^A-Za-z0-9._-]+/g, '_') || 'spectrum';
	return new Response(new Uint8Array(f.bytes), { headers: { 'content-type': type, 'content-disposition': `attachment; filename="${safeName}"` } });
});
