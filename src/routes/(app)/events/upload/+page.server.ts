import { fail, redirect } from '@sveltejs/kit';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { actorOf } from '$lib/server/platform/realtime';
import { submitNotice } from '$lib/server/alerts/service';
import { saveUpload } from '$lib/server/platform/storage';
import { config } from '$lib/server/platform/config';
import { DEFAULT_MAX_NOTICE_BYTES } from '$lib/alerts/voevent';
import { readSkyMap } from '$lib/sky';
import { maxJsonNoticeBytesAllowed, skymapReadError, skymapReadOptions } from '$lib/server/alerts/skymap-fetch';
import { detectNoticeFormat } from '$lib/alerts/notice-json';

export const load: PageServerLoad = () => {
	requirePermission('notices.submit');
	return { maxNoticeBytes: DEFAULT_MAX_NOTICE_BYTES, maxJsonNoticeBytes: maxJsonNoticeBytesAllowed(), maxSkymapBytes: config.alerts.skymapMaxBytes };
};

/** Largest notice of the format its text shows: a JSON notice may carry its sky map in base64. */
function limitFor(text: string): number {
	return detectNoticeFormat(text) === 'json' ? maxJsonNoticeBytesAllowed() : DEFAULT_MAX_NOTICE_BYTES;
}

type Errors = Partial<Record<'xml' | 'noticeFile' | 'skymap' | '_form', string>>;

function file(form: FormData, name: string): File | null {
	const v = form.get(name);
	return v instanceof File && v.size > 0 ? v : null;
}

export const actions: Actions = {
	default: async ({ request }) => {
		const user = requireUser('notices.submit');
		let form: FormData;
		try {
			form = await request.formData();
		} catch {
			return fail(400, { values: { xml: '' }, errors: { _form: 'The form could not be read (is the file too large for the server?).' } as Errors });
		}
		const typed = form.get('xml');
		const pasted = typeof typed === 'string' ? typed : '';
		const values = { xml: pasted.length <= DEFAULT_MAX_NOTICE_BYTES ? pasted : '' };
		const errors: Errors = {};

		const noticeFile = file(form, 'noticeFile');
		let xml = pasted;
		if (noticeFile) {
			// VOEvent or JSON is told by the content, not the file name; the size is checked before reading.
			if (noticeFile.size > maxJsonNoticeBytesAllowed()) errors.noticeFile = `The notice file is larger than ${maxJsonNoticeBytesAllowed()} bytes.`;
			else if (pasted.trim()) errors.noticeFile = 'Give either a file or pasted text, not both.';
			else {
				xml = await noticeFile.text();
				const limit = limitFor(xml);
				if (noticeFile.size > limit) errors.noticeFile = `The notice file is larger than ${limit} bytes, the limit for a VOEvent notice.`;
			}
		}
		if (!noticeFile && !pasted.trim()) errors.xml = 'Paste the notice (VOEvent XML or JSON) or choose a notice file.';
		if (Buffer.byteLength(pasted, 'utf8') > limitFor(pasted)) errors.xml = `The notice is larger than ${limitFor(pasted)} bytes.`;

		const skymapFile = file(form, 'skymap');
		let skymapBytes: Uint8Array | null = null;
		if (skymapFile) {
			if (skymapFile.size > config.alerts.skymapMaxBytes) errors.skymap = `The sky map is larger than ${config.alerts.skymapMaxBytes} bytes.`;
			else {
				skymapBytes = new Uint8Array(await skymapFile.arrayBuffer());
				try {
					readSkyMap(skymapBytes, skymapReadOptions({ skipDistance: true }));
				} catch (e) {
					errors.skymap = `This is not a sky map we can read: ${skymapReadError(e)}`;
				}
			}
		}
		if (Object.keys(errors).length) return fail(400, { values, errors });

		const uploadedSkymapPath = skymapBytes ? saveUpload(skymapBytes).path : null;
		const result = await submitNotice(xml, 'upload', { actor: actorOf(user), uploadedSkymapPath });
		if (result.status === 422) {
			const message = result.outcome.error ?? 'The notice was refused.';
			return fail(422, { values, errors: noticeFile ? { noticeFile: message } : ({ xml: message } as Errors) });
		}
		if (result.status === 202) {
			// Kept in the inbox; it is read once a notice it cites arrives. Nothing was refused, so the form is cleared.
			return { waiting: result.outcome.error ?? 'It names its event only through notices that have not arrived yet.' };
		}
		redirect(303, `/events/${result.outcome.eventId}`);
	}
};
