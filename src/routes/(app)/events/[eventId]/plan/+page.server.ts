import { error } from '@sveltejs/kit';
import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { usableTelescopes } from '$lib/server/people/scope';
import { getEvent } from '$lib/server/alerts/events';
import { targetsMeta } from '$lib/server/targeting/rankings';
import { claimTargetId, networkPlan, planCoverage, planStart } from '$lib/server/targeting/visibility-view';

const SHOWN = 60;

export const load: PageServerLoad = async ({ params, url, depends, locals }) => {
	requirePermission('events.view');
	depends('app:plan');
	const event = getEvent(params.eventId);
	if (!event) error(404, 'No such event.');
	const start = planStart(url.searchParams.get('start'));
	const started = performance.now();
	const { plan, labels, telescopes, claims } = await networkPlan(event.eventId, start);
	const covered = await planCoverage(event.eventId, plan, telescopes);
	const computeMs = performance.now() - started;
	// Claiming from the plan: with the viewer's own teams' telescopes (coordinators: any), targets no claim holds.
	const user = locals.user;
	const mayClaim = Boolean(user && event.state === 'active' && can({ user, telescopeId: null }, 'claims.create'));
	const claimable = new Set(mayClaim ? usableTelescopes(user, telescopes).map((t) => t.id) : []);
	// The claims the plan honoured (open and completed ones).
	const held = new Map(claims.map((c) => [`${c.targetKind}:${c.targetId}`, { state: c.state, teamName: c.teamName, telescopeName: c.telescopeName }]));
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
			mayClaim: claimable.has(t.telescopeId),
			assignments: t.assignments.slice(0, SHOWN).map((a) => {
				const id = claimTargetId(a);
				return { ...a, claimTargetId: id, claim: held.get(`${a.kind}:${id}`) ?? null };
			})
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
