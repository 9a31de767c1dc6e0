import type { PageServerLoad } from './$types';
import { can } from '$lib/server/people/permissions';
import { requirePermission } from '$lib/server/people/guard';
import { activeCatalog, listCatalogs } from '$lib/server/targeting/catalogs';
import { eventsPerCatalog } from '$lib/server/targeting/event-catalog';

export const load: PageServerLoad = ({ locals, depends }) => {
	requirePermission('events.view');
	depends('app:catalogs');
	const active = activeCatalog();
	const events = eventsPerCatalog();
	return {
		catalogs: listCatalogs().map((c) => ({
			id: c.id,
			name: c.name,
			sourceNote: c.sourceNote,
			synthetic: c.synthetic,
			rowCount: c.rowCount,
			weightSource: c.weightSource,
			state: c.state,
			error: c.error,
			rejected: c.report?.rejectedCount ?? 0,
			events: events.get(c.id) ?? 0,
			createdAt: c.createdAt.toISOString()
		})),
		activeId: active?.id ?? null,
		canManage: can({ user: locals.user }, 'catalogs.manage')
	};
};
