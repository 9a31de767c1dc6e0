import { error } from '@sveltejs/kit';
import type { RequestHandler } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { getEvent } from '$lib/server/alerts/events';
import { getTelescope } from '$lib/server/people/telescopes';
import { networkPlan, planStart } from '$lib/server/targeting/visibility-view';
import { observingListCsv, observingListJson } from '$lib/targeting/plan-export';

/** One telescope's observing list from the network plan: `?format=csv` (default) or `json`, `?start=` as on the page. */
export const GET: RequestHandler = async ({ params, url }) => {
	requirePermission('events.view');
	const event = getEvent(params.eventId);
	if (!event) error(404, 'No such event.');
	const telescope = getTelescope(params.telescopeId);
	if (!telescope) error(404, 'No such telescope.');
	const format = url.searchParams.get('format') ?? 'csv';
	if (format !== 'csv' && format !== 'json') error(400, 'format must be csv or json.');
	const { plan } = await networkPlan(event.eventId, planStart(url.searchParams.get('start')));
	const slug = `${event.sourceEventId}-${telescope.name}`.replace(/[^A-Za-z0-9._-]+/g, '-').replace(/-+/g, '-');
	const body = format === 'csv' ? observingListCsv(plan, telescope.id) : observingListJson(plan, telescope.id, `${event.sourceEventId} plan from ${plan.start}`);
	return new Response(body, {
		headers: {
			'content-type': format === 'csv' ? 'text/csv; charset=utf-8' : 'application/json',
			'content-disposition': `attachment; filename="${slug}-plan.${format}"`,
			'cache-control': 'no-store'
		}
	});
};
