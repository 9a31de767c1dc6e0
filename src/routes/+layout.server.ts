import type { LayoutServerLoad } from './$types';
import { can } from '$lib/server/people/permissions';
import { usesFakeSmtp } from '$lib/server/platform/mail';

export const load: LayoutServerLoad = ({ locals }) => {
	const user = locals.user;
	if (!user) return { user: null, nav: [] };
	const principal = { user };
	const nav = [
		{ href: '/', label: 'Board' },
		{ href: '/events', label: 'Events' },
		{ href: '/candidates', label: 'Candidates' },
		{ href: '/telescopes', label: 'Telescopes' },
		{ href: '/teams', label: 'Teams' },
		{ href: '/roster', label: 'Roster' },
		{ href: '/triage', label: 'Triage' },
		{ href: '/catalogs', label: 'Catalogues' }
	];
	if (can(principal, 'admin.view')) nav.push({ href: '/admin', label: 'Admin' });
	if (usesFakeSmtp() && can(principal, 'mailbox.view')) nav.push({ href: '/mailbox', label: 'Mailbox' });
	return { user: { name: user.name, email: user.email, roles: user.roles }, nav };
};
