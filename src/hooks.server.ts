import type { Handle, HandleServerError, ServerInit } from '@sveltejs/kit';
import { sequence } from '@sveltejs/kit/hooks';
import { openDatabase } from '$lib/server/platform/db';
import * as auth from '$lib/server/people/auth';
import { startMail } from '$lib/server/platform/mail';
import { installRealtime } from '$lib/server/platform/realtime';
import { installDuty } from '$lib/server/duty/paging';
import { installTargets } from '$lib/server/targeting/rankings';
import { installClaims } from '$lib/server/coordination/claims';
import { installVetting } from '$lib/server/candidates/vetting';
import { startAlerts } from '$lib/server/alerts/service';

export const init: ServerInit = async () => {
	openDatabase();
	installRealtime();
	installDuty();
	installTargets();
	installClaims();
	installVetting();
	await startMail();
	// Last: the broker listener may start processing notices at once.
	await startAlerts();
};

const handleAuth: Handle = async ({ event, resolve }) => {
	event.locals.user = null;
	event.locals.session = null;
	event.locals.telescopeId = null;

	const header = event.request.headers.get('authorization');
	if (header?.startsWith('Bearer ')) {
		const principal = auth.validateApiToken(header.slice(7).trim());
		if (principal) {
			event.locals.user = principal.user;
			event.locals.telescopeId = principal.telescopeId;
		}
		return resolve(event);
	}

	const token = event.cookies.get(auth.SESSION_COOKIE);
	if (token) {
		const { session, user, fresh } = auth.validateSessionToken(token);
		if (session) {
			if (fresh) auth.setSessionTokenCookie(event, token, session.expiresAt);
			event.locals.user = user;
			event.locals.session = session;
		} else {
			auth.deleteSessionTokenCookie(event);
		}
	}
	return resolve(event);
};

const handleHeaders: Handle = async ({ event, resolve }) => {
	const response = await resolve(event);
	response.headers.set('X-Content-Type-Options', 'nosniff');
	response.headers.set('Referrer-Policy', 'same-origin');
	response.headers.set('X-Frame-Options', 'DENY');
	return response;
};

export const handle = sequence(handleAuth, handleHeaders);

export const handleError: HandleServerError = ({ error, event, status, message }) => {
	const errorId = crypto.randomUUID().slice(0, 8);
	if (status >= 500) console.error(`[${errorId}] ${event.request.method} ${event.url.pathname}`, error);
	return { message: status >= 500 ? 'Something went wrong on the server.' : message, errorId };
};
