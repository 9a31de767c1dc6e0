import { error } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/guard';
import { can } from '$lib/server/permissions';
import { validateForm, failWith } from '$lib/server/forms';
import { eventDetail } from '$lib/server/board';
import * as duty from '$lib/server/duty';

export const load: PageServerLoad = ({ params, locals, depends }) => {
	requirePermission('events.view');
	depends('app:event');
	const event = eventDetail(params.eventId);
	if (!event) error(404, 'No such event.');
	return { event, canAcknowledge: can({ user: locals.user }, 'events.acknowledge') };
};

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
			if (e instanceof duty.DutyError) return failWith(form, {}, 400, e.message);
			throw e;
		}
	}
};
