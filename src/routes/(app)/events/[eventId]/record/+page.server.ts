import { error } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { failFromError, validateForm } from '$lib/server/platform/forms';
import { DomainError } from '$lib/server/platform/errors';
import { eventReport, saveRecordNote } from '$lib/server/closeout/report';
import { mailingList } from '$lib/server/closeout/mailing-list';
import { sendReportToList } from '$lib/server/closeout/report-mail';
import { RECORD_NOTE_MAX_CHARS } from '$lib/limits';

export const load: PageServerLoad = async ({ params, locals }) => {
	requirePermission('events.view');
	let report;
	try {
		report = await eventReport(params.eventId);
	} catch (e) {
		if (e instanceof DomainError) error(e.status, e.message);
		throw e;
	}
	const user = locals.user;
	const mayAnnotate = can({ user }, 'records.annotate');
	const maySend = can({ user }, 'records.send');
	return {
		report,
		mayAnnotate,
		maySend,
		maySetList: can({ user }, 'settings.mailing-list'),
		// Where the record goes: shown to those who send it or set it.
		listAddress: maySend || can({ user }, 'settings.mailing-list') ? mailingList().address : null
	};
};

const noteSchema = z.object({
	note: z.string({ error: 'Write a note, or leave it empty to remove it.' }).max(RECORD_NOTE_MAX_CHARS, `Keep the note under ${RECORD_NOTE_MAX_CHARS} characters.`)
});

export const actions: Actions = {
	note: async ({ request, params }) => {
		const user = requireUser('records.annotate');
		const { data, form, failure } = await validateForm(request, noteSchema);
		if (failure) return failure;
		try {
			const saved = saveRecordNote(user, params.eventId, data.note);
			return { noteDone: saved ? 'Note saved. It appears in the page, the Markdown, the PDF and the mail.' : 'Note removed.' };
		} catch (e) {
			return failFromError(form, e, { field: 'note' });
		}
	},
	send: async ({ params }) => {
		requireUser('records.send');
		const outcome = await sendReportToList(params.eventId);
		if (!outcome.sent) return { sendDone: 'Not sent: no mailing-list address is set.' };
		return { sendDone: `Sent to ${outcome.to} with the Markdown and the PDF attached.` };
	}
};
