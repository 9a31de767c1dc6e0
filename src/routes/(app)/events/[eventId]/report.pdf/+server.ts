import type { RequestHandler } from './$types';
import { error } from '@sveltejs/kit';
import { requirePermission } from '$lib/server/people/guard';
import { recordPdf } from '$lib/server/closeout/report-pdf';
import { DomainError } from '$lib/server/platform/errors';

/** The event's report as a print-ready PDF download. */
export const GET: RequestHandler = async ({ params }) => {
	requirePermission('events.view');
	try {
		const { fileName, bytes } = await recordPdf(params.eventId);
		return new Response(new Uint8Array(bytes), {
			headers: { 'content-type': 'application/pdf', 'content-disposition': `attachment; filename="${fileName}"`, 'cache-control': 'no-store' }
		});
	} catch (e) {
		if (e instanceof DomainError) error(e.status, e.message);
		throw e;
	}
};
