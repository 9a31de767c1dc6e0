import { error } from '@sveltejs/kit';
import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/guard';
import { getEvent } from '$lib/server/events';
import { targetsMeta } from '$lib/server/targets';
import { networkPlan, planCoverage, planStart } from '$lib/server/targets-view';

const SHOWN = 60;

export const load: PageServerLoad = ({ params, url, depends }) => {
	requirePermission('events.view');
	depends('app:plan');
	const event = getEvent(params.eventId);
	if (!event) error(404, 'No such event.');
	const start = planStart(url.searchParams.get('start'));
	const started = performance.now();
	const { plan, labels, telescopes } = networkPlan(event.eventId, start);
	const covered = planCoverage(event.eventId, plan, telescopes);
	const computeMs = performance.now() - started;
	const counts = new Map<string, number>();
	for (const d of plan.dropped) counts.set(d.reason, (counts.get(d.reason) ?? 0) + 1);
	return {
		event: { id: event.eventId, sourceEventId: event.sourceEventId, state: event.state },
		ranked: Boolean(targetsMeta(event.eventId)),
		start: plan.start,
		end: plan.end,
		computeMs,
		// Sky probability in the union of planned footprints, and the ranked galaxy share: two
		// different quantities, never added together.
		skyCovered: covered?.skyTotal ?? null,
		skyErrorBound: covered?.skyErrorBound ?? null,
		galaxyShareCovered: covered?.galaxyTotal ?? null,
		skyCurve: (covered?.sky ?? []).map((p) => [p.hours, p.probability] as [number, number]),
		galaxyCurve: (covered?.galaxies ?? []).map((p) => [p.hours, p.probability] as [number, number]),
		telescopes: plan.telescopes.map((t) => ({
			id: t.telescopeId,
			name: t.name,
			exposureS: t.exposureS,
			defaultFilter: t.defaultFilter,
			darkness: t.darkness,
			total: t.assignments.length,
			skyCovered: covered?.skyByTelescope[t.telescopeId] ?? 0,
			kind: t.assignments.some((a) => a.kind === 'field') ? 'fields' : 'galaxies',
			assignments: t.assignments.slice(0, SHOWN)
		})),
		dropped: {
			total: plan.dropped.length,
			byReason: [...counts].sort((a, b) => b[1] - a[1]),
			first: plan.dropped
				.slice()
				.sort((a, b) => b.probability - a.probability)
				.slice(0, 15)
				.map((d) => ({ ...d, label: labels.get(d.targetId) ?? d.targetId }))
		}
	};
};
