import { error } from '@sveltejs/kit';
import { getRequestEvent } from '$app/server';
import { can, type Permission, type Principal } from './permissions';
import type { SessionUser } from './auth';

/**
 * Authorise the current request (inside an action, load or `+server.ts` handler).
 * 401 without a principal, 403 when the principal lacks the permission.
 */
export function requirePermission(permission: Permission): Principal & { user: SessionUser | null } {
	const { locals } = getRequestEvent();
	const principal: Principal = { user: locals.user, telescopeId: locals.telescopeId ?? null };
	if (!principal.user && !principal.telescopeId) error(401, 'Sign in to continue.');
	if (!can(principal, permission)) error(403, 'Your role does not allow this.');
	return principal;
}

/** Like requirePermission, but a person must be behind the request (not a telescope token). */
export function requireUser(permission: Permission): SessionUser {
	const principal = requirePermission(permission);
	if (!principal.user) error(403, 'This needs a person, not a telescope token.');
	return principal.user;
}
