import type { RequestHandler } from './$types';
import { error } from '@sveltejs/kit';
import { requirePermission } from '$lib/server/people/guard';
import { recordMarkdown } from '$lib/server/closeout/report';
import { DomainError } from '$lib/server/platform/errors';

/** The event's report as a Markdown download. */
export const GET: RequestHandler = async ({ params }) => {
	requirePermission('events.view');
	try {
		const { fileName, text } = await recordMarkdown(params.eventId);
		return new Response(text, {
			headers: { 'content-type': 'text/markdown; charset=utf-8', 'content-disposition': `attachment; filename="${fileName}"`, 'cache-control': 'no-store' }
		});
	} catch (e) {
		if (e instanceof DomainError) error(e.status, e.message);
		throw e;
	}
};
