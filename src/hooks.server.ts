import type { Handle, HandleServerError, ServerInit } from '@sveltejs/kit';
import { sequence } from '@sveltejs/kit/hooks';
import { openDatabase } from '$lib/server/platform/db';
import * as auth from '$lib/server/people/auth';
import { apiError } from '$lib/server/platform/api';
import '$lib/field-messages';
import { startMail } from '$lib/server/platform/mail';
import { startPhone } from '$lib/server/platform/phone';
import { installRealtime } from '$lib/server/platform/realtime';
import { liveAccess } from '$lib/server/people/live-access';
import { installDuty } from '$lib/server/duty/paging';
import { installTargets } from '$lib/server/targeting/rankings';
import { abandonUnfinishedImports } from '$lib/server/targeting/catalogs';
import { installClaims } from '$lib/server/coordination/claims';
import { installMovedClaims } from '$lib/server/coordination/moved-claims';
import { installNotifications } from '$lib/server/people/notifications';
import { installVetting } from '$lib/server/candidates/vetting';
import { installReportMail } from '$lib/server/closeout/report-mail';
import { startAlerts } from '$lib/server/alerts/service';
import { installWebhooks, startFakeReceiver } from '$lib/server/chat/webhooks';
import { installChatMessages } from '$lib/server/chat/messages';

export const init: ServerInit = async () => {
	openDatabase();
	abandonUnfinishedImports();
	installRealtime(liveAccess);
	installDuty();
	installTargets();
	installClaims();
	installMovedClaims();
	installNotifications();
	installVetting();
	installReportMail();
	installChatMessages();
	installWebhooks();
	await startMail();
	await startFakeReceiver();
	await startPhone();
	// Last: the broker listener may start processing notices at once.
	await startAlerts();
};

const handleAuth: Handle = async ({ event, resolve }) => {
	event.locals.user = null;
	event.locals.session = null;
	event.locals.telescopeId = null;

	const header = event.request.headers.get('authorization');
	const bearer = header?.match(/^Bearer\s+(.*)$/i);
	if (bearer) {
		const principal = auth.validateApiToken(bearer[1].trim());
		// A program holding a wrong, revoked or mistyped token is told so, rather than treated as nobody.
		if (!principal) {
			const response = apiError(401, 'invalid_token', 'This API token is not valid: it is unknown, revoked, or its person’s account is disabled. Check the token, or ask an administrator for a new one.');
			response.headers.set('WWW-Authenticate', 'Bearer error="invalid_token"');
			return response;
		}
		event.locals.user = principal.user;
		event.locals.telescopeId = principal.telescopeId;
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
	// No page here needs a camera, microphone, location, sensors, payment or USB: deny them to the
	// page and anything it could embed.
	response.headers.set(
		'Permissions-Policy',
		'accelerometer=(), camera=(), geolocation=(), gyroscope=(), magnetometer=(), microphone=(), payment=(), usb=()'
	);
	return response;
};

// Headers first, so that they are set on every answer, the early refusal of a bad token included.
export const handle = sequence(handleHeaders, handleAuth);

export const handleError: HandleServerError = ({ error, event, status, message }) => {
	const errorId = crypto.randomUUID().slice(0, 8);
	if (status >= 500) console.error(`[${errorId}] ${event.request.method} ${event.url.pathname}`, error);
	return { message: status >= 500 ? 'Something went wrong on the server.' : message, errorId };
};
