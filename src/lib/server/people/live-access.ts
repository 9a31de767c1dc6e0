/**
 * Who may use the live hub, as the hub asks it (platform/realtime.ts `LiveAccess`): a session
 * cookie or an API token identifies the principal, and the permissions table decides the rooms.
 */
import { parse as parseCookie } from 'cookie';
import { SESSION_COOKIE, validateApiToken, validateSessionToken } from './auth';
import { can, type Principal } from './permissions';
import type { LiveAccess } from '../platform/realtime';

export const liveAccess: LiveAccess = {
	identify({ cookieHeader, bearer }) {
		const sessionToken = parseCookie(cookieHeader)[SESSION_COOKIE];
		if (sessionToken) {
			const { user } = validateSessionToken(sessionToken);
			if (user) return { user, telescopeId: null };
		}
		if (bearer) {
			const principal = validateApiToken(bearer);
			if (principal) return { user: principal.user, telescopeId: principal.telescopeId };
		}
		return null;
	},
	mayWatch(principal, room) {
		// The hub hands back the principal `identify` gave it: a signed-in person or a telescope.
		return can(principal as Principal, room === 'board' ? 'board.view' : 'events.view');
	}
};
