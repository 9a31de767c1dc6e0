import { error } from '@sveltejs/kit';
import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { usesFakeSmtp } from '$lib/server/platform/mail';
import { usesFakePhone } from '$lib/server/platform/phone';
import { receivedMail, fakeSmtpPort, fakeSmtpSpoolDir } from '$lib/server/platform/fake-smtp';
import { mailParts } from '$lib/server/platform/mail-view';
import { fakeWebhookPort } from '$lib/server/platform/fake-webhook';

export const load: PageServerLoad = () => {
	if (!usesFakeSmtp()) error(404, 'The mailbox exists only while mail goes to the local catcher.');
	requirePermission('mailbox.view');
	// Only what the page shows: the text as parts with secrets masked, never the raw text or HTML.
	const messages = receivedMail()
		.slice(0, 100)
		.map((m) => ({ id: m.id, subject: m.subject, to: m.to, receivedAt: m.receivedAt, parts: mailParts(m.text) }));
	return { messages, port: fakeSmtpPort(), spoolDir: fakeSmtpSpoolDir(), webhookCatcher: fakeWebhookPort() !== null, phoneLog: usesFakePhone() };
};
