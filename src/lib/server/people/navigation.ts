import { permissionsOf, type Permission, type Principal } from './permissions';

export interface NavItem {
	href: string;
	label: string;
}

/**
 * The main navigation, each page with the permission its load asks for: a person sees a link
 * only when the page behind it will open for them.
 */
const NAV: readonly (NavItem & { permission: Permission })[] = [
	{ href: '/', label: 'Board', permission: 'board.view' },
	{ href: '/events', label: 'Events', permission: 'events.view' },
	{ href: '/candidates', label: 'Candidates', permission: 'events.view' },
	{ href: '/archive', label: 'Archive', permission: 'events.view' },
	// Everyone may read the rules (from the candidates list); the menu leads the people who change them.
	{ href: '/candidates/rules', label: 'Kilonova rules', permission: 'kilonova.thresholds' },
	{ href: '/telescopes', label: 'Telescopes', permission: 'telescopes.view' },
	{ href: '/teams', label: 'Teams', permission: 'teams.view' },
	{ href: '/roster', label: 'Roster', permission: 'board.view' },
	{ href: '/triage', label: 'Triage', permission: 'triage.view' },
	{ href: '/inbox', label: 'Notice inbox', permission: 'notices.inbox' },
	{ href: '/catalogs', label: 'Catalogues', permission: 'events.view' },
	{ href: '/admin', label: 'Admin', permission: 'admin.view' }
];

/** The signed-in person's permissions and the links they lead to. `extra` adds pages that exist only in some setups (the mailbox). */
export function navigationFor(principal: Principal, extra: (NavItem & { permission: Permission })[] = []): { permissions: Permission[]; nav: NavItem[] } {
	const permissions = permissionsOf(principal);
	const held = new Set(permissions);
	const nav = [...NAV, ...extra].filter((item) => held.has(item.permission)).map(({ href, label }) => ({ href, label }));
	return { permissions, nav };
}
