import { error } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { validateForm, failWith } from '$lib/server/platform/forms';
import { config } from '$lib/server/platform/config';
import { ourNumber, usesFakePhone } from '$lib/server/platform/phone';
import { fakePhonePort, fakePhoneSpoolDir, phoneRecords, sendInboundText } from '$lib/server/platform/fake-phone';
import { mailParts } from '$lib/server/platform/mail-view';
import { toE164, E164_HELP } from '$lib/page-channels';
import { PHONE_TEXT_MAX_CHARS } from '$lib/limits';

function guard() {
	if (!usesFakePhone()) error(404, 'The phone log exists only while texts and calls go to the local fake messaging service.');
	requirePermission('phonelog.view');
}

export const load: PageServerLoad = () => {
	guard();
	// What the page shows: text as parts with link secrets masked, as the mailbox does.
	const records = phoneRecords()
		.slice(0, 100)
		.map((r) => ({ id: r.id, sid: r.sid, direction: r.direction, type: r.type, at: r.at, from: r.from, to: r.to, parts: mailParts(r.text), twiml: r.twiml ? mailParts(r.twiml).map((p) => p.text).join('') : null, hookStatus: r.hookStatus }));
	return { records, port: fakePhonePort(), spoolDir: fakePhoneSpoolDir(), ourNumber: ourNumber() };
};

const replySchema = z.object({
	from: z.string({ error: 'Give the number the reply comes from.' }).trim().min(1, 'Give the number the reply comes from.').max(40, E164_HELP),
	body: z.string({ error: 'Type the reply.' }).trim().min(1, 'Type the reply.').max(PHONE_TEXT_MAX_CHARS, `A text has at most ${PHONE_TEXT_MAX_CHARS} characters.`)
});

export const actions: Actions = {
	/** Play a text reply through the fake: it calls our inbound hook as the service would, signed. */
	reply: async ({ request }) => {
		guard();
		const { data, form, failure } = await validateForm(request, replySchema);
		if (failure) return failure;
		const from = toE164(data.from);
		if (!from) return failWith(form, { from: E164_HELP });
		const r = await sendInboundText(`${config.publicUrl}/api/v1/phone/inbound`, { from, to: ourNumber(), body: data.body });
		const answer = /<Message>([\s\S]*)<\/Message>/.exec(r.answer)?.[1].replace(/&lt;/g, '<').replace(/&gt;/g, '>').replace(/&amp;/g, '&') ?? r.answer;
		return { replied: { status: r.status, answer } };
	}
};
