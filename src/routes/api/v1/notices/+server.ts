import { json } from '@sveltejs/kit';
import { apiError, apiRoute } from '$lib/server/platform/api';
import { requirePermission } from '$lib/server/people/guard';
import { actorOf } from '$lib/server/platform/realtime';
import { submitNotice } from '$lib/server/alerts/service';
import { DEFAULT_MAX_NOTICE_BYTES } from '$lib/alerts/voevent';

const XML_TYPES = ['application/xml', 'text/xml', 'application/voevent+xml'];

/**
 * POST a raw VOEvent: 201 `{ eventId, noticeId, outcome }`, 200 on a repeat, 422 when refused,
 * 202 `{ outcome: 'waiting', reason }` when it names its event only through cited packets not stored yet.
 */
export const POST = apiRoute(async ({ request }) => {
	const principal = requirePermission('notices.submit');
	const type = (request.headers.get('content-type') ?? '').split(';')[0].trim().toLowerCase();
	if (!XML_TYPES.includes(type)) return apiError(415, 'unsupported_media_type', 'Send the notice as raw XML with Content-Type application/xml or text/xml.');
	const declared = Number(request.headers.get('content-length'));
	if (Number.isFinite(declared) && declared > DEFAULT_MAX_NOTICE_BYTES)
		return apiError(413, 'too_large', `A notice may be at most ${DEFAULT_MAX_NOTICE_BYTES} bytes.`);
	const body = new Uint8Array(await request.arrayBuffer());
	if (body.byteLength > DEFAULT_MAX_NOTICE_BYTES) return apiError(413, 'too_large', `A notice may be at most ${DEFAULT_MAX_NOTICE_BYTES} bytes.`);
	const xml = new TextDecoder('utf-8').decode(body);
	if (xml.trim() === '') return apiError(400, 'empty', 'The body is empty: send the notice XML.');
	const result = await submitNotice(xml, 'api', { actor: actorOf(principal.user, 'API') });
	const o = result.outcome;
	if (result.status === 422) return apiError(422, 'invalid_notice', o.error ?? 'The notice was refused.', { inboxId: o.inboxId });
	if (result.status === 202) return json({ eventId: null, noticeId: null, outcome: 'waiting', reason: o.error }, { status: 202 });
	return json(
		{ eventId: o.eventId, noticeId: o.noticeId, outcome: result.duplicate ? 'repeat' : o.outcome, ...(o.error ? { skymapError: o.error } : {}) },
		{ status: result.status }
	);
});
