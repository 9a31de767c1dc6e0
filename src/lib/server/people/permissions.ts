import type { Role } from '../platform/db/schema';
import type { SessionUser } from './auth';
import { ROLE_RANK } from '../../roles';

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
	// The development mailbox holds every message the app sent, reset links included: administrators only.
	'mailbox.view': { roles: ['admin'] },
	// The development phone log holds every text and call, verification codes and acknowledgement codes included: administrators only.
	'phonelog.view': { roles: ['admin'] },
	'notices.submit': { roles: ['admin', 'coordinator', 'duty'] },
	'events.acknowledge': { roles: ['duty', 'coordinator'] },
	'triage.view': { roles: ['admin', 'coordinator', 'duty'] },
	'triage.manage': { roles: ['admin', 'coordinator'] },
	'notices.inbox': { roles: ['admin', 'coordinator', 'duty'] },
	'notices.retry': { roles: ['admin', 'coordinator'] },
	/** Edit which Params each notice stream uses for which field (how its notices are read). */
	'notices.vocabulary': { roles: ['admin', 'coordinator'] },
	'shifts.manage': { roles: ['admin', 'coordinator'] },
	'catalogs.manage': { roles: ['admin', 'coordinator'] },
	'claims.create': { roles: ['observer', 'coordinator'] },
	'claims.manage': { roles: ['coordinator'] },
	/** Switch the galaxy catalogue an event is ranked against (re-ranks it). */
	'targets.catalog': { roles: ['coordinator'] },
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
	'kilonova.thresholds': { roles: ['coordinator'] },
	// The event record: the coordinators write its note and send it; where it goes is a collaboration setting.
	'records.annotate': { roles: ['coordinator'] },
	'records.send': { roles: ['coordinator'] },
	'settings.mailing-list': { roles: ['admin', 'coordinator'] },
	/** Close an event (its claims and spectrum takes are released; new work is refused) and reopen it. */
	'events.close': { roles: ['coordinator'] },
	/** Chat webhooks: which team-chat rooms hear of alerts, retractions, candidates and closings. */
	'webhooks.manage': { roles: ['admin', 'coordinator'] },
	/** A secret calendar address for one's own duty shifts (empty for those never on the roster). */
	'calendar.own': { roles: EVERYONE },
	/** A secret calendar address for the whole roster, with names. */
	'calendar.roster': { roles: ['admin', 'coordinator'] }
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

/**
 * The roles in `roles` that a person holding `granterRoles` may not hand out (invite with, add or
 * take away): those ranked above the granter's highest role (ROLE_RANK), so only an administrator
 * makes an administrator. Empty when every role is within reach.
 */
export function rolesOutOfReach(granterRoles: readonly Role[], roles: readonly Role[]): Role[] {
	const reach = Math.max(-1, ...granterRoles.map((r) => ROLE_RANK[r]));
	return [...new Set(roles)].filter((r) => ROLE_RANK[r] > reach);
}

/** Every permission the principal holds: what the layout hands to pages to decide which links and buttons to show. */
export function permissionsOf(principal: Principal | null | undefined): Permission[] {
	return (Object.keys(PERMISSIONS) as Permission[]).filter((p) => can(principal, p));
}

/** Roles that hold a permission, for pages that explain who may do what. */
export function rolesFor(permission: Permission): readonly Role[] {
	return PERMISSIONS[permission].roles;
}
