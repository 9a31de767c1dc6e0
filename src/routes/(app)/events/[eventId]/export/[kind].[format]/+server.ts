import { error, json } from '@sveltejs/kit';
import type { RequestHandler } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { eventExport, exportCsv, exportFileName, exportJson } from '$lib/server/closeout/export';
import { EXPORT_KINDS, type ExportKind } from '$lib/event-view';

/**
 * GET `/events/{id}/export/{pointings|claims|candidates|photometry}.{csv|json}`: the event's record
 * as a download, for any signed-in member (`events.view`), open or closed events alike.
 */
export const GET: RequestHandler = ({ params }) => {
	requirePermission('events.view');
	const kind = params.kind as ExportKind;
	if (!EXPORT_KINDS.includes(kind) || (params.format !== 'csv' && params.format !== 'json'))
		error(404, `No such export: choose ${EXPORT_KINDS.join(', ')} as .csv or .json.`);
	const t = eventExport(params.eventId, kind);
	if (!t) error(404, 'No such event.');
	const name = exportFileName(t.sourceEventId, kind, params.format);
	const headers = { 'content-disposition': `attachment; filename="${name}"`, 'cache-control': 'no-store' };
	if (params.format === 'json') return json(exportJson(params.eventId, t), { headers });
	return new Response(exportCsv(t), { headers: { ...headers, 'content-type': 'text/csv; charset=utf-8' } });
};
