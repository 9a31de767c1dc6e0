import type { LayoutServerLoad } from './$types';
import { navigationFor } from '$lib/server/people/navigation';
import type { Permission } from '$lib/server/people/permissions';
import { usesFakeSmtp } from '$lib/server/platform/mail';

export const load: LayoutServerLoad = ({ locals }) => {
	const user = locals.user;
	if (!user) return { user: null, nav: [], permissions: [] as Permission[] };
	const { nav, permissions } = navigationFor({ user }, usesFakeSmtp() ? [{ href: '/mailbox', label: 'Mailbox', permission: 'mailbox.view' }] : []);
	return { user: { name: user.name, email: user.email, roles: user.roles }, nav, permissions };
};
