import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { failWith, validateForm } from '$lib/server/platform/forms';
import { actorOf } from '$lib/server/platform/realtime';
import { listInboxProblems, RAW_PREVIEW_CHARS } from '$lib/server/alerts/inbox';
import { reprocessNotice } from '$lib/server/alerts/ingest';
import { getEvent } from '$lib/server/alerts/events';

export const load: PageServerLoad = ({ locals, depends }) => {
	requirePermission('notices.inbox');
	depends('app:inbox');
	return { problems: listInboxProblems(), previewChars: RAW_PREVIEW_CHARS, canRetry: can({ user: locals.user }, 'notices.retry'), canEditStreams: can({ user: locals.user }, 'notices.vocabulary') };
};

const retryForm = z.object({
	inboxId: z
		.string({ error: 'Choose the notice to process again.' })
		.trim()
		.regex(/^\d{1,12}$/, 'Choose the notice to process again.')
		.transform(Number)
});

export const actions: Actions = {
	retry: async ({ request }) => {
		const user = requireUser('notices.retry');
		const { data, form, failure } = await validateForm(request, retryForm);
		if (failure) return failure;
		const outcome = await reprocessNotice(data.inboxId, { actor: actorOf(user) });
		if (!outcome) return failWith(form, {}, 404, 'That notice is no longer in the inbox.');
		const event = outcome.eventId ? getEvent(outcome.eventId) : undefined;
		const name = event?.sourceEventId ?? outcome.eventId;
		const retried = { inboxId: data.inboxId, ok: outcome.outcome !== 'rejected', eventId: outcome.eventId, text: '' };
		switch (outcome.outcome) {
			case 'rejected':
				retried.text = `Refused again: ${outcome.error ?? 'no reason given'}`;
				break;
			case 'event-created':
				retried.text = `Processed: new event ${name}.`;
				break;
			case 'notice-added':
				retried.text = `Processed: notice added to ${name}.`;
				break;
			case 'event-retracted':
				retried.text = `Processed: ${name} is retracted by this notice.`;
				break;
			case 'waiting':
				retried.ok = false;
				retried.text = `Still waiting: ${outcome.error ?? 'a notice it cites has not arrived'}`;
				break;
			case 'already-processed':
				retried.text = `Already processed earlier, as part of ${name}; nothing changed.`;
				break;
		}
		if (retried.ok && outcome.error) retried.text += ` Its sky map could not be used: ${outcome.error}`;
		return { retried };
	}
};
