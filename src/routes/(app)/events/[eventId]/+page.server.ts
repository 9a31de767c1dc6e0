import { error } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { EXPORT_KINDS } from '$lib/event-view';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import { eventDetail } from '$lib/server/alerts/board';
import * as duty from '$lib/server/duty/paging';
import { eventCoverage } from '$lib/server/coordination/event-coverage';
import { eventSky } from '$lib/server/targeting/event-sky';
import { telescopesFor } from '$lib/server/people/scope';
import { isWideField } from '$lib/targeting/telescope';
import { claimsOutsideRanking } from '$lib/server/targeting/event-catalog';
import { replayBounds } from '$lib/server/closeout/sky-replay';
import { listClaims } from '$lib/server/coordination/claims';
import { closeEvent, closeInput, reopenEvent, reopenInput } from '$lib/server/closeout/close';

export const load: PageServerLoad = ({ params, locals, depends }) => {
	requirePermission('events.view');
	depends('app:event');
	const event = eventDetail(params.eventId);
	if (!event) error(404, 'No such event.');
	const usable = event.skymaps.filter((m) => !m.error);
	const current = usable.findLast((m) => m.noticeId === event.skymap?.noticeId) ?? usable.at(-1);
	const covered = eventCoverage(event.id);
	const user = locals.user;
	// Telescopes the viewer may claim with: their teams' (coordinators: every one).
	const telescopes = user && can({ user, telescopeId: null }, 'claims.create')
		? telescopesFor(user)
				.map((t) => ({ id: t.id, name: t.name, teamName: t.teamName, wide: isWideField(t) }))
		: [];
	return {
		event,
		canAcknowledge: can({ user }, 'events.acknowledge'),
		canClose: can({ user }, 'events.close'),
		// The report page is only useful to someone with a telescope to report for.
		mayReport: Boolean(user && telescopesFor(user).length && can({ user }, 'observations.report')),
		sky: eventSky(event.id, current?.id ?? null, user, covered),
		// The replay slider's range (first notice to close or now) and the moments where the picture changes.
		replay: replayBounds(event.id),
		openClaims: listClaims(event.id, { openOnly: true }).length,
		coverage: covered && {
			observations: covered.observations,
			union: covered.union,
			errorBound: covered.errorBound,
			sumOfFootprints: covered.sumOfFootprints,
			curve: covered.curve,
			galaxyCurve: covered.galaxyCurve,
			teams: covered.teams,
			galaxies: covered.galaxies,
			computeMs: covered.computeMs
		},
		claiming: { telescopes, canClaim: telescopes.length > 0 && event.state === 'active' },
		exports: EXPORT_KINDS,
		// Claims a re-ranking (another catalogue, a new map) left outside the ranking: shown, never hidden.
		outside: claimsOutsideRanking(event.id)
	};
};

const closeSchema = closeInput.extend({ confirm: z.literal('yes', { error: 'Tick the box to confirm that open claims and spectrum takes are released.' }) });

const ackSchema = z.object({ confirm: z.literal('yes', { error: 'Confirm the acknowledgement.' }) });

export const actions: Actions = {
	acknowledge: async ({ request, params }) => {
		const user = requireUser('events.acknowledge');
		const { form, failure } = await validateForm(request, ackSchema);
		if (failure) return failure;
		try {
			const { latencyS } = duty.acknowledge(user, params.eventId);
			return { done: `Acknowledged ${Math.round(latencyS)} s after the notice arrived.` };
		} catch (e) {
			return failFromError(form, e);
		}
	},
	close: async ({ request, params }) => {
		const user = requireUser('events.close');
		const { form, data, failure } = await validateForm(request, closeSchema);
		if (failure) return failure;
		try {
			const { releasedClaimIds, releasedTakeIds } = closeEvent(user, params.eventId, data);
			return { closed: { claims: releasedClaimIds.length, takes: releasedTakeIds.length } };
		} catch (e) {
			return failFromError(form, e);
		}
	},
	reopen: async ({ request, params }) => {
		const user = requireUser('events.close');
		const { form, data, failure } = await validateForm(request, reopenInput);
		if (failure) return failure;
		try {
			reopenEvent(user, params.eventId, data);
			return { reopened: true };
		} catch (e) {
			return failFromError(form, e);
		}
	}
};
