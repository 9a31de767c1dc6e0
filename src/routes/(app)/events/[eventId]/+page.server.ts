import { error } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import * as duty from '$lib/server/duty/paging';
import { eventPage } from '$lib/server/closeout/event-page';
import { closeEvent, closeInput, reopenEvent, reopenInput } from '$lib/server/closeout/close';

export const load: PageServerLoad = async ({ params, locals, depends }) => {
	requirePermission('events.view');
	depends('app:event');
	const page = await eventPage(params.eventId, locals.user);
	if (!page) error(404, 'No such event.');
	return page;
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
