import { redirect } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { failFromError, failWith, validateForm } from '$lib/server/platform/forms';
import {
	listStreams,
	previewNotice,
	resetVocabulary,
	saveVocabulary,
	streamIdSchema,
	vocabularyForm,
	vocabularyFor,
	vocabularyFromForm,
	vocabularyToForm
} from '$lib/server/alerts/streams';
import { DEFAULT_MAX_NOTICE_BYTES, DEFAULT_VOCABULARY, VOCABULARY_FIELDS } from '$lib/alerts/voevent';

export const load: PageServerLoad = ({ url }) => {
	requirePermission('notices.vocabulary');
	const streams = listStreams();
	const asked = url.searchParams.get('stream');
	const checked = asked === null ? null : streamIdSchema.safeParse(asked);
	const stream = checked?.success ? checked.data : (streams[0]?.stream ?? null);
	return {
		streams,
		stream,
		streamError: checked && !checked.success ? checked.error.issues[0].message : null,
		configured: stream ? streams.some((s) => s.stream === stream && s.configured) : false,
		values: stream ? vocabularyToForm(stream, vocabularyFor(stream)) : null,
		defaults: vocabularyToForm('', DEFAULT_VOCABULARY),
		fields: VOCABULARY_FIELDS,
		saved: url.searchParams.get('saved'),
		maxNoticeBytes: DEFAULT_MAX_NOTICE_BYTES
	};
};

const previewForm = z.intersection(
	vocabularyForm,
	z.object({
		xml: z
			.string({ error: 'Paste a notice to try the vocabulary on.' })
			.trim()
			.min(1, 'Paste a notice to try the vocabulary on.')
			.max(DEFAULT_MAX_NOTICE_BYTES, `A notice may be at most ${DEFAULT_MAX_NOTICE_BYTES} bytes.`)
	})
);

const resetForm = z.object({ stream: streamIdSchema });

const back = (stream: string, saved: string) => `/inbox/streams?stream=${encodeURIComponent(stream)}&saved=${saved}`;

export const actions: Actions = {
	/** Read the pasted notice with the vocabulary as edited; nothing is stored. */
	preview: async ({ request }) => {
		requireUser('notices.vocabulary');
		const { data, form, failure } = await validateForm(request, previewForm);
		if (failure) return failure;
		let vocabulary;
		try {
			vocabulary = vocabularyFromForm(data);
		} catch (e) {
			return failFromError(form, e);
		}
		const { xml, ...values } = data;
		return { preview: previewNotice(xml, vocabulary, data.stream), values: { ...values, xml } };
	},
	save: async ({ request }) => {
		const user = requireUser('notices.vocabulary');
		const { data, form, failure } = await validateForm(request, vocabularyForm);
		if (failure) return failure;
		try {
			saveVocabulary(data.stream, vocabularyFromForm(data), user.id);
		} catch (e) {
			return failFromError(form, e);
		}
		redirect(303, back(data.stream, 'saved'));
	},
	reset: async ({ request }) => {
		requireUser('notices.vocabulary');
		const { data, form, failure } = await validateForm(request, resetForm);
		if (failure) return failure;
		if (!data.stream) return failWith(form, { stream: 'Choose a stream.' });
		resetVocabulary(data.stream);
		redirect(303, back(data.stream, 'reset'));
	}
};
