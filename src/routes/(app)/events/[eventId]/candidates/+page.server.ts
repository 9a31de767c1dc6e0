import { error } from '@sveltejs/kit';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { failFromError, formNumber, formText, formUtc } from '$lib/server/platform/forms';
import { getEvent } from '$lib/server/alerts/events';
import { teamsFor, telescopesFor } from '$lib/server/people/scope';
import { listCandidates, reportCandidate, type CandidateInput } from '$lib/server/candidates/candidates';
import type { SessionUser } from '$lib/server/people/auth';
import { vetEvent, vettingSummaries } from '$lib/server/candidates/vetting';
import { POSITION_ERR_ARCSEC_MAX } from '$lib/limits';

/** The telescopes and teams a person may report for (coordinators: all). */
function choices(user: SessionUser | null) {
	const telescopes = telescopesFor(user).map((t) => ({ id: t.id, name: t.name, teamName: t.teamName, filters: t.filters }));
	const teams = teamsFor(user).map((t) => ({ id: t.id, name: t.name }));
	return { telescopes, teams };
}

export const load: PageServerLoad = ({ params, locals, depends }) => {
	requirePermission('events.view');
	depends('app:candidates');
	const event = getEvent(params.eventId);
	if (!event) error(404, 'No such event.');
	const canReport = can({ user: locals.user, telescopeId: locals.telescopeId }, 'candidates.report');
	// Vet whatever changed since the last look (cheap when nothing did), so the columns are current.
	vetEvent(event.eventId);
	const candidates = listCandidates(event.eventId);
	const vetted = vettingSummaries(candidates.map((c) => c.id));
	return {
		event: { id: event.eventId, sourceEventId: event.sourceEventId, state: event.state, closure: event.closure },
		candidates: candidates.map((c) => ({ ...c, ...vetted.get(c.id)! })),
		canReport,
		mayReportObservations: Boolean(locals.user && can({ user: locals.user }, 'observations.report') && choices(locals.user).telescopes.length),
		...(canReport ? choices(locals.user) : { telescopes: [], teams: [] }),
		now: new Date().toISOString().slice(0, 19) + 'Z',
		positionErrMaxArcsec: POSITION_ERR_ARCSEC_MAX
	};
};

export const actions: Actions = {
	report: async ({ request, params }) => {
		const user = requireUser('candidates.report');
		const form = await request.formData();
		const raw = {
			eventId: params.eventId,
			name: formText(form.get('name')) ?? '',
			raDeg: formNumber(form.get('raDeg')),
			decDeg: formNumber(form.get('decDeg')),
			positionErrArcsec: formNumber(form.get('positionErrArcsec')),
			discoveredAt: formUtc(formText(form.get('discoveredAt'))),
			magnitude: formNumber(form.get('magnitude')),
			magnitudeErr: formNumber(form.get('magnitudeErr')),
			filter: formText(form.get('filter')),
			telescopeId: formText(form.get('telescopeId')),
			teamId: formText(form.get('teamId')),
			notes: formText(form.get('notes'))
		};
		try {
			const out = reportCandidate({ user }, raw as CandidateInput);
			return { reported: { name: out.candidate.name, warning: out.warning } };
		} catch (e) {
			// Field problems are the form's 400; refusals keep their status (403, 404, 409).
			return failFromError(form, e);
		}
	}
};
