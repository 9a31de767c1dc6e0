import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import * as webhooks from '$lib/server/chat/webhooks';
import { fakeWebhookPort } from '$lib/server/platform/fake-webhook';
import { WEBHOOK_KINDS } from '$lib/webhooks';
import { WEBHOOK_NAME_MAX, WEBHOOK_URL_MAX } from '$lib/limits';

export const load: PageServerLoad = ({ locals, depends }) => {
	requirePermission('webhooks.manage');
	depends('app:webhooks');
	const port = fakeWebhookPort();
	return {
		webhooks: webhooks.listWebhooks(),
		fakeReceiverUrl: port === null ? null : `http://127.0.0.1:${port}/hook/`,
		canSeeCatcher: can({ user: locals.user }, 'mailbox.view')
	};
};

const kindsField = z.array(z.enum(WEBHOOK_KINDS, { error: 'Choose among the kinds of message offered.' })).min(1, 'Choose at least one kind of message to send.');
// Lengths are checked again (with the same words) by the domain module; here a size cap before any work.
const addSchema = z.object({
	name: z.string({ error: 'Give the webhook a name.' }).trim().min(1, 'Give the webhook a name, such as the chat room it posts to.').max(WEBHOOK_NAME_MAX, `The name is too long: at most ${WEBHOOK_NAME_MAX} characters.`),
	url: z.string({ error: 'Paste the webhook address.' }).trim().min(1, 'Paste the incoming-webhook address the chat product gave you.').max(WEBHOOK_URL_MAX, `The address is too long: at most ${WEBHOOK_URL_MAX} characters.`),
	kinds: kindsField
});
const idSchema = z.object({ webhookId: z.string({ error: 'Choose a webhook.' }).min(1, 'Choose a webhook.') });
const kindsSchema = idSchema.extend({ kinds: kindsField });
const retrySchema = z.object({ deliveryId: z.coerce.number({ error: 'Choose a message.' }).int('Choose a message.').positive('Choose a message.') });

export const actions: Actions = {
	add: async ({ request }) => {
		const user = requireUser('webhooks.manage');
		const { data, form, failure } = await validateForm(request, addSchema, ['kinds']);
		if (failure) return failure;
		try {
			await webhooks.addWebhook(user, data);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: `Webhook “${data.name}” added. Send it a test message to check it reaches the room.` };
	},
	kinds: async ({ request }) => {
		requireUser('webhooks.manage');
		const { data, form, failure } = await validateForm(request, kindsSchema, ['kinds']);
		if (failure) return failure;
		try {
			webhooks.setWebhookKinds(data.webhookId, data.kinds);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'Saved which messages this webhook takes.' };
	},
	test: async ({ request }) => {
		const user = requireUser('webhooks.manage');
		const { data, form, failure } = await validateForm(request, idSchema);
		if (failure) return failure;
		try {
			webhooks.sendTest(data.webhookId, user.name);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'Test message queued: its state shows below in a moment.' };
	},
	retry: async ({ request }) => {
		requireUser('webhooks.manage');
		const { data, form, failure } = await validateForm(request, retrySchema);
		if (failure) return failure;
		try {
			webhooks.retryDelivery(data.deliveryId);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'The message will be sent again.' };
	},
	remove: async ({ request }) => {
		requireUser('webhooks.manage');
		const { data, form, failure } = await validateForm(request, idSchema);
		if (failure) return failure;
		try {
			webhooks.removeWebhook(data.webhookId);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'Webhook removed; messages still waiting for it were dropped.' };
	}
};
