import type { RequestHandler } from './$types';
import { apiError, apiErrorFrom } from '$lib/server/platform/api';
import { config } from '$lib/server/platform/config';
import { receiveInboundText } from '$lib/server/duty/ack-links';
import { PHONE_INBOUND_MAX_BYTES } from '$lib/limits';

const xml = (s: string) => s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;');

/**
 * The messaging service's inbound webhook (a text sent to our number), form-encoded as the
 * service posts it. No session: the service's signature (X-Twilio-Signature, under the auth token)
 * is the permission. The answer is a messaging document whose message the service texts back;
 * a refused reply keeps its 4xx status. Too many replies from one number or one client address
 * get 429 with Retry-After, as an API error (nothing to text back to a flood).
 */
export const POST: RequestHandler = async ({ request, url, getClientAddress }) => {
	const type = request.headers.get('content-type') ?? '';
	if (!type.startsWith('application/x-www-form-urlencoded')) return apiError(415, 'unsupported_media_type', 'Send the form-encoded fields the messaging service sends.');
	const declared = Number(request.headers.get('content-length') ?? '0');
	if (declared > PHONE_INBOUND_MAX_BYTES) return apiError(413, 'too_large', `The hook reads at most ${PHONE_INBOUND_MAX_BYTES / 1024} KiB.`);
	const raw = await request.text();
	if (raw.length > PHONE_INBOUND_MAX_BYTES) return apiError(413, 'too_large', `The hook reads at most ${PHONE_INBOUND_MAX_BYTES / 1024} KiB.`);
	const params = Object.fromEntries(new URLSearchParams(raw));
	try {
		const r = await receiveInboundText({ url: `${config.publicUrl}${url.pathname}${url.search}`, signature: request.headers.get('x-twilio-signature') ?? '', params, clientAddress: getClientAddress() });
		return new Response(`<?xml version="1.0" encoding="UTF-8"?><Response><Message>${xml(r.answer)}</Message></Response>`, {
			status: r.status,
			headers: { 'content-type': 'text/xml; charset=utf-8' }
		});
	} catch (e) {
		return apiErrorFrom(e);
	}
};
