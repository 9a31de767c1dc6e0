import type { RequestEvent } from '@sveltejs/kit';
import * as auth from './auth';

/** Start a session for a person who just proved who they are, and set the cookie. */
export function startSession(event: RequestEvent, userId: string): void {
	const token = auth.generateSessionToken();
	const session = auth.createSession(token, userId, {
		userAgent: event.request.headers.get('user-agent'),
		ipAddress: event.getClientAddress()
	});
	auth.setSessionTokenCookie(event, token, session.expiresAt);
}

/** Only same-site paths, so a crafted `next` cannot send people elsewhere. */
export function safeNext(next: string | null): string {
	if (!next || !next.startsWith('/') || next.startsWith('//') || next.startsWith('/\\')) return '/';
	return next;
}
