import { error } from '@sveltejs/kit';
import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { caughtWebhooks, fakeWebhookPort } from '$lib/server/platform/fake-webhook';

export const load: PageServerLoad = ({ depends }) => {
	const port = fakeWebhookPort();
	if (port === null) error(404, 'The webhook catcher exists only while the local fake receiver runs (FAKE_WEBHOOK_PORT is not "off").');
	requirePermission('mailbox.view');
	depends('app:webhook-catcher');
	return {
		port,
		caught: caughtWebhooks()
			.slice(0, 100)
			.map((c) => ({ id: c.id, receivedAt: c.receivedAt, path: c.path, status: c.status, text: typeof (c.json as { text?: unknown })?.text === 'string' ? (c.json as { text: string }).text : null, raw: c.json === null ? c.raw.slice(0, 2000) : null }))
	};
};
