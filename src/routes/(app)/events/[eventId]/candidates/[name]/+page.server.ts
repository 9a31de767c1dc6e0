import { error } from '@sveltejs/kit';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { failFromError, failWith, formNumber, formText } from '$lib/server/platform/forms';
import { getCandidateDetail } from '$lib/server/candidates/detail';
import { candidateIdByName } from '$lib/server/candidates/candidates';
import { addPhotometryCsv } from '$lib/server/candidates/photometry';
import { MAX_SPECTRUM_BYTES, spectrumPoints, uploadSpectrum } from '$lib/server/candidates/spectra';
import { releaseCandidate, takeCandidate } from '$lib/server/candidates/takers';
import { classifyCandidate } from '$lib/server/candidates/classifications';
import { decideCandidate } from '$lib/server/candidates/decisions';
import { addComment } from '$lib/server/candidates/discussion';

/** Spectra drawn on the page (newest first); older ones are still listed with their download. */
const CHARTED_SPECTRA = 3;
const MAX_CSV_BYTES = 2 * 1024 * 1024;

export const load: PageServerLoad = async ({ params, locals, depends }) => {
	requirePermission('events.view');
	depends('app:candidates');
	const detail = getCandidateDetail(params.eventId, params.name);
	if (!detail) error(404, `No candidate ${params.name} in this event.`);
	const who = { user: locals.user, telescopeId: locals.telescopeId };
	const id = detail.candidate.id;
	return {
		...detail,
		spectrumCharts: (await Promise.all(detail.spectra.slice(0, CHARTED_SPECTRA).map((s) => spectrumPoints(id, s.id)))).filter((p) => p !== null),
		me: locals.user ? { id: locals.user.id } : null,
		may: {
			photometry: can(who, 'candidates.photometry') && Boolean(locals.user),
			spectroscopy: can(who, 'candidates.spectroscopy'),
			classify: can(who, 'candidates.classify'),
			decide: can(who, 'candidates.decide'),
			discuss: can(who, 'candidates.discuss')
		}
	};
};

/** The candidate the page is about; an unknown name is a 404 before anything is read from the form. */
function candidateOf(params: { eventId: string; name: string }): string {
	const id = candidateIdByName(params.eventId, params.name);
	if (!id) error(404, `No candidate ${params.name} in this event.`);
	return id;
}

export const actions: Actions = {
	photometry: async ({ request, params }) => {
		const user = requireUser('candidates.photometry');
		const form = await request.formData();
		const id = candidateOf(params);
		const file = form.get('file');
		let csv = formText(form.get('csv')) ?? '';
		if (file instanceof File && file.size > 0) {
			if (file.size > MAX_CSV_BYTES) return failWith(form, { file: `A photometry file may be at most ${MAX_CSV_BYTES / 1024 / 1024} MB.` });
			csv = await file.text();
		}
		if (!csv.trim()) return failWith(form, { csv: 'Paste the measurements or choose a CSV file.' });
		try {
			const out = await addPhotometryCsv({ user }, id, csv, new Date(), 'form');
			return { photometryAdded: out.added };
		} catch (e) {
			return failFromError(form, e, { field: 'csv' });
		}
	},
	take: async ({ request, params }) => {
		const user = requireUser('candidates.spectroscopy');
		const form = await request.formData();
		const id = candidateOf(params);
		try {
			takeCandidate(user, id, { note: formText(form.get('note')) });
			return { taken: true };
		} catch (e) {
			return failFromError(form, e, { field: 'note' });
		}
	},
	release: async ({ request, params }) => {
		const user = requireUser('candidates.spectroscopy');
		const form = await request.formData();
		const id = candidateOf(params);
		try {
			releaseCandidate(user, id);
			return { released: true };
		} catch (e) {
			return failFromError(form, e);
		}
	},
	spectrum: async ({ request, params }) => {
		const user = requireUser('candidates.spectroscopy');
		const declared = Number(request.headers.get('content-length') ?? '0');
		if (declared > MAX_SPECTRUM_BYTES + 64 * 1024) {
			return failWith(new FormData(), { file: `The file is ${(declared / 1024 / 1024).toFixed(1)} MB, over the limit of ${MAX_SPECTRUM_BYTES / 1024 / 1024} MB for a spectrum.` }, 413);
		}
		const form = await request.formData();
		const id = candidateOf(params);
		const file = form.get('file');
		if (!(file instanceof File) || file.size === 0) return failWith(form, { file: 'Choose the spectrum file (text columns or FITS).' });
		try {
			const s = await uploadSpectrum(user, id, { bytes: new Uint8Array(await file.arrayBuffer()), fileName: file.name || undefined, notes: formText(form.get('notes')) });
			return { spectrumAdded: s.originalName };
		} catch (e) {
			return failFromError(form, e, { field: 'file' });
		}
	},
	classify: async ({ request, params }) => {
		const user = requireUser('candidates.classify');
		const form = await request.formData();
		const id = candidateOf(params);
		const raw = {
			label: formText(form.get('label')),
			confidence: formText(form.get('confidence')),
			redshift: formNumber(form.get('redshift')),
			notes: formText(form.get('notes')),
			spectrumId: formText(form.get('spectrumId'))
		};
		try {
			classifyCandidate(user, id, raw);
			return { classified: true };
		} catch (e) {
			return failFromError(form, e);
		}
	},
	decide: async ({ request, params }) => {
		const user = requireUser('candidates.decide');
		const form = await request.formData();
		const id = candidateOf(params);
		const raw = { state: formText(form.get('state')), reason: formText(form.get('reason')), note: formText(form.get('note')) };
		try {
			const d = decideCandidate(user, id, raw);
			return { decided: d.summary };
		} catch (e) {
			return failFromError(form, e);
		}
	},
	comment: async ({ request, params }) => {
		const user = requireUser('candidates.discuss');
		const form = await request.formData();
		const id = candidateOf(params);
		try {
			addComment(user, id, { body: formText(form.get('body')) });
			return { commented: true };
		} catch (e) {
			return failFromError(form, e, { field: 'body' });
		}
	}
};
