import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { listEvents } from '$lib/server/alerts/events';

export const load: PageServerLoad = ({ locals }) => {
	requirePermission('events.view');
	const principal = { user: locals.user };
	return {
		events: listEvents(),
		canSubmit: can(principal, 'notices.submit'),
		canTriage: can(principal, 'triage.view'),
		canSeeInbox: can(principal, 'notices.inbox')
	};
};
