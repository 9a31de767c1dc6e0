import type { Role } from '../platform/db/schema';
import type { SessionUser } from './auth';

const EVERYONE: readonly Role[] = ['admin', 'coordinator', 'duty', 'observer', 'spectroscopist', 'viewer'];

/**
 * The one permissions table. Every action and API route asks `requirePermission(...)` with
 * one of these names; the matrix test walks every role against every mutating entry.
 * `robot` marks actions a telescope's API token (no person behind it) may take.
 */
export const PERMISSIONS = {
	'board.view': { roles: EVERYONE },
	'events.view': { roles: EVERYONE },
	'telescopes.view': { roles: EVERYONE },
	'teams.view': { roles: EVERYONE },
	'account.manage': { roles: EVERYONE },
	'admin.view': { roles: ['admin', 'coordinator'] },
	'people.invite': { roles: ['admin', 'coordinator'] },
	'people.manage': { roles: ['admin'] },
	'teams.manage': { roles: ['admin', 'coordinator'] },
	'telescopes.manage': { roles: ['admin', 'coordinator'] },
	'tokens.manage': { roles: ['admin'] },
	'mailbox.view': { roles: ['admin', 'coordinator'] },
	'notices.submit': { roles: ['admin', 'coordinator', 'duty'] },
	'events.acknowledge': { roles: ['duty', 'coordinator'] },
	'triage.manage': { roles: ['admin', 'coordinator'] },
	'shifts.manage': { roles: ['admin', 'coordinator'] },
	'catalogs.manage': { roles: ['admin', 'coordinator'] },
	'claims.create': { roles: ['observer', 'coordinator'] },
	'claims.manage': { roles: ['coordinator'] },
	'observations.report': { roles: ['observer', 'coordinator'], robot: true },
	'candidates.report': { roles: ['observer', 'coordinator'], robot: true },
	// After the report: light curves come from the teams (and their robots); spectra and
	// classifications from spectroscopists; anyone who works the event may set a candidate aside
	// or promote it, and discuss it; the kilonova thresholds are the coordinators'.
	'candidates.photometry': { roles: ['observer', 'spectroscopist', 'coordinator'], robot: true },
	'candidates.spectroscopy': { roles: ['spectroscopist', 'coordinator'] },
	'candidates.classify': { roles: ['spectroscopist', 'coordinator'] },
	'candidates.decide': { roles: ['duty', 'observer', 'spectroscopist', 'coordinator'] },
	'candidates.discuss': { roles: ['admin', 'coordinator', 'duty', 'observer', 'spectroscopist'] },
	'kilonova.thresholds': { roles: ['coordinator'] }
} as const satisfies Record<string, { roles: readonly Role[]; robot?: boolean }>;

export type Permission = keyof typeof PERMISSIONS;

export interface Principal {
	user: SessionUser | null;
	telescopeId?: string | null;
}

export function can(principal: Principal | null | undefined, permission: Permission): boolean {
	const rule: { roles: readonly Role[]; robot?: boolean } = PERMISSIONS[permission];
	if (!principal) return false;
	if (principal.user) return principal.user.roles.some((r) => rule.roles.includes(r));
	return Boolean(principal.telescopeId && rule.robot);
}

/** Roles that hold a permission, for pages that explain who may do what. */
export function rolesFor(permission: Permission): readonly Role[] {
	return PERMISSIONS[permission].roles;
}
