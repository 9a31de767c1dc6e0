import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/guard';
import { can } from '$lib/server/permissions';
import { listEvents } from '$lib/server/events';

export const load: PageServerLoad = ({ locals }) => {
	requirePermission('events.view');
	const principal = { user: locals.user };
	return {
		events: listEvents(),
		canSubmit: can(principal, 'notices.submit'),
		canTriage: can(principal, 'triage.manage')
	};
};
