import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { validateForm } from '$lib/server/platform/forms';
import { actorOf } from '$lib/server/platform/realtime';
import { listEvents } from '$lib/server/alerts/events';
import { getPolicy, policyForm, policyInput, updatePolicy } from '$lib/server/alerts/triage-policy';
import { DEFAULT_TRIAGE_POLICY } from '$lib/alerts/triage';

export const load: PageServerLoad = ({ locals }) => {
	requirePermission('triage.view');
	const row = getPolicy();
	return {
		canManage: can({ user: locals.user }, 'triage.manage'),
		policy: policyInput(row),
		defaults: DEFAULT_TRIAGE_POLICY,
		updatedAt: row.updatedAt?.toISOString() ?? null,
		events: listEvents({ state: 'active' }).map((e) => ({
			eventId: e.eventId,
			sourceEventId: e.sourceEventId,
			role: e.role,
			triage: e.triage
		}))
	};
};

export const actions: Actions = {
	default: async ({ request }) => {
		const user = requireUser('triage.manage');
		const { data, failure } = await validateForm(request, policyForm);
		if (failure) return failure;
		const count = updatePolicy(actorOf(user), data);
		return { saved: `Policy saved; ${count} event${count === 1 ? '' : 's'} re-evaluated.` };
	}
};
