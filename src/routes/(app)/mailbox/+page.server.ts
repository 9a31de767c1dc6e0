import { error } from '@sveltejs/kit';
import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { usesFakeSmtp } from '$lib/server/platform/mail';
import { receivedMail, fakeSmtpPort } from '$lib/server/platform/fake-smtp';

export const load: PageServerLoad = () => {
	if (!usesFakeSmtp()) error(404, 'The mailbox exists only while mail goes to the local catcher.');
	requirePermission('mailbox.view');
	return { messages: receivedMail().slice(0, 100), port: fakeSmtpPort() };
};
