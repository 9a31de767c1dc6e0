import { error } from '@sveltejs/kit';
import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/guard';
import { getEvent } from '$lib/server/events';
import { listTelescopes } from '$lib/server/telescopes';
import { eventFields, eventGalaxies, GALAXY_SORTS, targetsMeta, type GalaxySort } from '$lib/server/targets';
import { telescopeViews, tonightFor, visibility } from '$lib/server/targets-view';

const PAGE_SIZE = 25;

export const load: PageServerLoad = ({ params, url, depends }) => {
	requirePermission('events.view');
	depends('app:targets');
	const event = getEvent(params.eventId);
	if (!event) error(404, 'No such event.');
	const now = new Date();
	const meta = targetsMeta(event.eventId);
	const telescopes = listTelescopes();
	const summary = event.skymap
		? { distanceMean: event.skymap.distanceMean, distanceStd: event.skymap.distanceStd }
		: null;
	const views = telescopeViews(telescopes, summary, meta?.fieldCounts ?? {}, now);

	const sortParam = url.searchParams.get('sort') ?? 'rank';
	const sort: GalaxySort = (GALAXY_SORTS as readonly string[]).includes(sortParam) ? (sortParam as GalaxySort) : 'rank';
	const dir = url.searchParams.get('dir') === 'desc' ? 'desc' : 'asc';
	const page = Math.max(1, Math.floor(Number(url.searchParams.get('page')) || 1));
	const { total, galaxies } = eventGalaxies(event.eventId, { sort, dir, offset: (page - 1) * PAGE_SIZE, limit: PAGE_SIZE });

	// Visibility is for one telescope at a time (its site, limits and tonight).
	const wanted = url.searchParams.get('telescope');
	const chosen = telescopes.find((t) => t.id === wanted) ?? telescopes.find((t) => views.find((v) => v.id === t.id)?.kind === 'galaxies') ?? telescopes[0] ?? null;
	const chosenView = chosen ? views.find((v) => v.id === chosen.id)! : null;
	const night = chosen ? tonightFor(chosen, now) : null;
	const see = (target: { ra: number; dec: number }) => (chosen && night ? visibility(chosen, night, { raDeg: target.ra, decDeg: target.dec }, now) : null);

	const galaxyRows = galaxies.map((g) => ({ ...g, visibility: chosenView?.kind === 'galaxies' ? see(g) : null }));
	const fields = chosen && chosenView?.kind === 'fields' ? eventFields(event.eventId, chosen.id).slice(0, 50).map((f) => ({ ...f, visibility: see(f) })) : [];
	const dropped = [...galaxyRows.filter((g) => g.visibility?.sunDropped).map((g) => ({ id: g.name, reason: g.visibility!.sunDropped! })), ...fields.filter((f) => f.visibility?.sunDropped).map((f) => ({ id: f.fieldId, reason: f.visibility!.sunDropped! }))];

	return {
		event: { id: event.eventId, sourceEventId: event.sourceEventId, state: event.state, skymap: event.skymap },
		meta: meta && {
			skymapId: meta.skymapId,
			catalog: meta.catalog,
			mode: meta.mode,
			level: meta.level,
			regionAreaDeg2: meta.regionAreaDeg2,
			candidates: meta.candidates,
			galaxiesStored: meta.galaxiesStored,
			withoutDistance: meta.withoutDistance,
			completeness: meta.completeness,
			computedAt: meta.computedAt.toISOString(),
			computeMs: meta.computeMs
		},
		stale: Boolean(meta && event.skymap && meta.skymapId !== event.skymap.skymapId),
		telescopes: views,
		chosen: chosenView,
		galaxies: galaxyRows,
		fields,
		dropped,
		now: now.toISOString(),
		paging: { page, pageSize: PAGE_SIZE, total, pages: Math.max(1, Math.ceil(total / PAGE_SIZE)), sort, dir }
	};
};
