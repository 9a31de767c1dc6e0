import { error, fail } from '@sveltejs/kit';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { failFromError, failWith, formNumber, formText, formUtc } from '$lib/server/platform/forms';
import { getEvent } from '$lib/server/alerts/events';
import { telescopesFor } from '$lib/server/people/scope';
import { parseObservationCsv, report, reportMany, type ObservationInput } from '$lib/server/coordination/observations';
import type { SessionUser } from '$lib/server/people/auth';
import { FORM_OBSERVATION_CSV_MAX_BYTES } from '$lib/limits';

function ownTelescopes(user: SessionUser | null) {
	return telescopesFor(user).map((t) => ({ id: t.id, name: t.name, teamName: t.teamName, filters: t.filters }));
}

export const load: PageServerLoad = ({ params, locals }) => {
	requirePermission('observations.report');
	const event = getEvent(params.eventId);
	if (!event) error(404, 'No such event.');
	return { event: { id: event.eventId, sourceEventId: event.sourceEventId, state: event.state, eventTime: event.eventTime, retractedAt: event.retractedAt, closure: event.closure }, telescopes: ownTelescopes(locals.user), now: new Date().toISOString().slice(0, 19) + 'Z' };
};

export const actions: Actions = {
	report: async ({ request, params }) => {
		const user = requireUser('observations.report');
		const form = await request.formData();
		const raw = {
			eventId: params.eventId,
			telescopeId: formText(form.get('telescopeId')),
			observedAt: formUtc(formText(form.get('observedAt'))),
			raDeg: formNumber(form.get('raDeg')),
			decDeg: formNumber(form.get('decDeg')),
			fieldId: formText(form.get('fieldId')),
			filter: formText(form.get('filter')),
			exposureS: formNumber(form.get('exposureS')),
			limitingMag: formNumber(form.get('limitingMag')),
			seeingArcsec: formNumber(form.get('seeingArcsec')),
			notes: formText(form.get('notes'))
		};
		if (!raw.telescopeId) return failWith(form, { telescopeId: 'Choose a telescope.' });
		try {
			const r = report({ user }, raw as ObservationInput, 'form');
			return { reported: { id: r.observation.id, completedClaims: r.completedClaimIds.length } };
		} catch (e) {
			return failFromError(form, e);
		}
	},
	upload: async ({ request, params }) => {
		const user = requireUser('observations.report');
		const form = await request.formData();
		const telescopeId = formText(form.get('telescopeId'));
		const file = form.get('file');
		if (!telescopeId) return failWith(form, { telescopeId: 'Choose a telescope.' });
		if (!(file instanceof File) || file.size === 0) return failWith(form, { file: 'Choose a CSV file of pointings.' });
		if (file.size > FORM_OBSERVATION_CSV_MAX_BYTES) return failWith(form, { file: `The file is larger than ${FORM_OBSERVATION_CSV_MAX_BYTES / 1e6} MB.` });
		// All or nothing, every problem with its CSV line so the file can be fixed in one pass.
		const refuse = (csvErrors: { line: number; message: string }[]) =>
			fail(400, { values: { telescopeId }, errors: { file: `${csvErrors.length} problem(s); nothing was stored.` } as Record<string, string>, message: undefined, csvErrors });
		const parsed = await parseObservationCsv(await file.text());
		if (parsed.errors.length) return refuse(parsed.errors);
		try {
			const out = await reportMany({ user }, parsed.rows.map((r) => ({ ...r, eventId: params.eventId, telescopeId })), 'csv', { lines: parsed.lines });
			if (out.errors.length) return refuse(out.errors);
			return { uploaded: { count: out.results.length, completedClaims: out.results.reduce((n, r) => n + r.completedClaimIds.length, 0) } };
		} catch (e) {
			return failFromError(form, e, { field: 'file' });
		}
	}
};
