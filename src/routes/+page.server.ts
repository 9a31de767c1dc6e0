import { redirect } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import { boardNow } from '$lib/server/alerts/board';
import * as duty from '$lib/server/duty/paging';

export const load: PageServerLoad = async ({ locals, depends }) => {
	if (!locals.user) return { board: null };
	requirePermission('board.view');
	depends('app:board');
	const { activity, events } = await boardNow();
	const onShift = duty.onShift().map((s) => ({ name: s.name, rank: s.rank, endsAt: s.endsAt.toISOString(), you: s.userId === locals.user!.id }));
	return {
		board: {
			activity,
			events,
			onShift,
			canAcknowledge: can({ user: locals.user }, 'events.acknowledge')
		}
	};
};

const ackSchema = z.object({ eventId: z.string({ error: 'Choose an event.' }).trim().min(1, 'Choose an event.').max(64) });

export const actions: Actions = {
	acknowledge: async ({ request, locals }) => {
		// The board lives outside the signed-in layout, so send a signed-out visitor to sign in as that layout would.
		if (!locals.user && !locals.telescopeId) redirect(303, '/sign-in?next=%2F');
		const user = requireUser('events.acknowledge');
		const { data, form, failure } = await validateForm(request, ackSchema);
		if (failure) return failure;
		try {
			const { latencyS } = duty.acknowledge(user, data.eventId);
			return { done: `Acknowledged ${Math.round(latencyS)} s after the notice arrived.`, eventId: data.eventId };
		} catch (e) {
			return failFromError(form, e);
		}
	}
};
