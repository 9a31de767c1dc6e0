import { json } from '@sveltejs/kit';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { actorOf } from '$lib/server/platform/realtime';
import { submitNotice } from '$lib/server/alerts/service';
import { maxJsonNoticeBytesAllowed } from '$lib/server/alerts/skymap-fetch';
import { DEFAULT_MAX_NOTICE_BYTES } from '$lib/alerts/voevent';

const XML_TYPES = ['application/xml', 'text/xml', 'application/voevent+xml'];
const JSON_TYPES = ['application/json'];

/**
 * POST a raw notice: VOEvent XML (`application/xml`, `text/xml`) or a JSON notice
 * (`application/json`, docs/notice-format.md). 201 `{ eventId, noticeId, outcome }`, 200 on a
 * repeat, 413 too large, 415 another type, 422 when refused (with the reason),
 * 202 `{ outcome: 'waiting', reason }` when a VOEvent names its event only through cited packets not stored yet.
 */
export const POST = apiRoute(async ({ request }) => {
	const principal = requirePermission('notices.submit');
	const type = (request.headers.get('content-type') ?? '').split(';')[0].trim().toLowerCase();
	const format = JSON_TYPES.includes(type) ? 'json' : XML_TYPES.includes(type) ? 'voevent' : null;
	if (!format)
		return apiError(415, 'unsupported_media_type', 'Send the notice as raw XML (Content-Type application/xml or text/xml) or as a JSON notice (Content-Type application/json).');
	// A JSON notice may carry its sky map: it is allowed the notice limit plus the sky-map limit in base64.
	const maxBytes = format === 'json' ? maxJsonNoticeBytesAllowed() : DEFAULT_MAX_NOTICE_BYTES;
	const tooLarge = () =>
		apiError(413, 'too_large', format === 'json' ? `A JSON notice, with its sky map, may be at most ${maxBytes} bytes.` : `A notice may be at most ${maxBytes} bytes.`);
	const declared = Number(request.headers.get('content-length'));
	if (Number.isFinite(declared) && declared > maxBytes) return tooLarge();
	const body = new Uint8Array(await request.arrayBuffer());
	if (body.byteLength > maxBytes) return tooLarge();
	const text = new TextDecoder('utf-8').decode(body);
	if (text.trim() === '') return apiError(400, 'empty', format === 'json' ? 'The body is empty: send the JSON notice.' : 'The body is empty: send the notice XML.');
	const result = await submitNotice(text, 'api', { actor: actorOf(principal.user, 'API'), format });
	const o = result.outcome;
	if (result.status === 422) return apiError(422, 'invalid_notice', o.error ?? 'The notice was refused.', { inboxId: o.inboxId });
	if (result.status === 202) return json({ eventId: null, noticeId: null, outcome: 'waiting', reason: o.error }, { status: 202 });
	return json(
		{ eventId: o.eventId, noticeId: o.noticeId, outcome: result.duplicate ? 'repeat' : o.outcome, ...(o.error ? { skymapError: o.error } : {}) },
		{ status: result.status }
	);
});
