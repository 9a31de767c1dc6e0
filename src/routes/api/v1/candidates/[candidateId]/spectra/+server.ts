import { json } from '@sveltejs/kit';
import { apiError, apiRoute, apiErrorFrom } from '$lib/server/platform/api';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { candidateRow } from '$lib/server/candidates/candidates';
import { listSpectra, MAX_SPECTRUM_BYTES, uploadSpectrum } from '$lib/server/candidates/spectra';

/** GET the candidate's spectra (summaries), newest first: `{ spectra: [...] }`. */
export const GET = apiRoute(({ params }) => {
	requirePermission('events.view');
	const id = params.candidateId ?? '';
	if (!candidateRow(id)) return apiError(404, 'not_found', `No candidate ${id}.`);
	return json({ spectra: listSpectra(id) });
});

/**
 * POST a 1-D spectrum (ASCII, FITS table or FITS 1-D image, gzip or not), as `multipart/form-data`
 * (field `file`, optional `notes`) or as the raw body (`?fileName=…&notes=…`). The file is read
 * before anything is stored: 201 `{ spectrum }`; 422 `invalid_spectrum` with the reason; 413 over
 * the size limit; 409 on a retracted event. Needs a person (not a telescope token).
 */
export const POST = apiRoute(async ({ params, request, url }) => {
	const user = requireUser('candidates.spectroscopy');
	const declared = Number(request.headers.get('content-length') ?? '0');
	// Multipart framing adds a little; anything far over the limit is refused before it is read.
	if (declared > MAX_SPECTRUM_BYTES + 64 * 1024)
		return apiError(413, 'too_large', `The upload is ${(declared / 1024 / 1024).toFixed(1)} MB, over the limit of ${MAX_SPECTRUM_BYTES / 1024 / 1024} MB for a spectrum.`);
	const type = (request.headers.get('content-type') ?? '').split(';')[0].trim().toLowerCase();
	let file: { bytes: Uint8Array; fileName?: string; notes?: string };
	if (type === 'multipart/form-data') {
		let form: FormData;
		try {
			form = await request.formData();
		} catch {
			return apiError(400, 'bad_request', 'The multipart body could not be read.');
		}
		const part = form.get('file');
		if (!(part instanceof File)) return apiError(422, 'invalid', 'file: attach the spectrum as the form field "file".', { file: 'attach the spectrum file' });
		const notes = form.get('notes');
		file = { bytes: new Uint8Array(await part.arrayBuffer()), fileName: part.name || undefined, notes: typeof notes === 'string' ? notes : undefined };
	} else {
		file = { bytes: new Uint8Array(await request.arrayBuffer()), fileName: url.searchParams.get('fileName') ?? undefined, notes: url.searchParams.get('notes') ?? undefined };
	}
	try {
		return json({ spectrum: await uploadSpectrum(user, params.candidateId ?? '', file) }, { status: 201 });
	} catch (e) {
		return apiErrorFrom(e);
	}
});
