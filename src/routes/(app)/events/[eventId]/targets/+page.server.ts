import { error, fail } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/guard';
import { can } from '$lib/server/permissions';
import * as claims from '$lib/server/claims';
import { getEvent } from '$lib/server/events';
import { listTelescopes } from '$lib/server/telescopes';
import { eventFields, eventGalaxies, GALAXY_SORTS, targetsMeta, type GalaxySort } from '$lib/server/targets';
import { telescopeViews, tonightFor, visibility } from '$lib/server/targets-view';

const PAGE_SIZE = 25;

export const load: PageServerLoad = ({ params, url, depends, locals }) => {
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

	// Claim state per target: only the open or finished claims matter to someone choosing what to observe.
	const claimRows = claims.listClaims(event.eventId).filter((c) => c.state !== 'released' && c.state !== 'lapsed');
	const claimOf = (kind: 'galaxy' | 'field', id: string) => {
		const c = claimRows.filter((r) => r.targetKind === kind && r.targetId === id).sort((a, b) => (a.state === 'done' ? 1 : 0) - (b.state === 'done' ? 1 : 0))[0];
		return c ? { id: c.id, state: c.state, teamId: c.teamId, teamName: c.teamName, telescopeName: c.telescopeName, filter: c.filter, epoch: c.epoch } : null;
	};
	const user = locals.user;
	const mayClaim = Boolean(user && can({ user, telescopeId: null }, 'claims.create'));
	const coordinator = Boolean(user?.roles.includes('coordinator'));
	const ownTelescopes = user ? telescopes.filter((t) => coordinator || user.teamIds.includes(t.teamId)).map((t) => ({ id: t.id, name: t.name, teamName: t.teamName })) : [];

	return {
		claiming: { allowed: mayClaim, coordinator, teamIds: user?.teamIds ?? [], telescopes: ownTelescopes, telescopeId: ownTelescopes.find((t) => t.id === chosen?.id)?.id ?? ownTelescopes[0]?.id ?? null },
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
		galaxies: galaxyRows.map((g) => ({ ...g, claim: claimOf('galaxy', String(g.galaxyId)) })),
		fields: fields.map((f) => ({ ...f, claim: claimOf('field', f.fieldId) })),
		dropped,
		now: now.toISOString(),
		paging: { page, pageSize: PAGE_SIZE, total, pages: Math.max(1, Math.ceil(total / PAGE_SIZE)), sort, dir }
	};
};

const claimForm = z.object({
	targetKind: z.enum(['galaxy', 'field']),
	targetId: z.string().trim().min(1).max(200),
	telescopeId: z.string().trim().min(1, 'Choose a telescope.')
});
const claimIdForm = z.object({ claimId: z.string().trim().min(1) });

/** Claim errors become form failures with the server's wording, which names the holder. */
function failClaim(e: unknown, target?: string) {
	if (e instanceof claims.ClaimError) return fail(e.status, { message: e.message, target: target ?? null });
	throw e;
}

async function transitionAction(request: Request, act: (user: import('$lib/server/auth').SessionUser, claimId: string) => unknown) {
	const user = requireUser('claims.create');
	const parsed = claimIdForm.safeParse(Object.fromEntries(await request.formData()));
	if (!parsed.success) return fail(400, { message: 'Which claim?', target: null });
	try {
		act(user, parsed.data.claimId);
		return { ok: true };
	} catch (e) {
		return failClaim(e);
	}
}

export const actions: Actions = {
	claim: async ({ request, params }) => {
		const user = requireUser('claims.create');
		const parsed = claimForm.safeParse(Object.fromEntries(await request.formData()));
		if (!parsed.success) return fail(400, { message: parsed.error.issues[0]?.message ?? 'Invalid claim.', target: null });
		const target = `${parsed.data.targetKind}:${parsed.data.targetId}`;
		try {
			claims.claim(user, { eventId: params.eventId, targetKind: parsed.data.targetKind, targetId: parsed.data.targetId, telescopeId: parsed.data.telescopeId });
			return { ok: true, target };
		} catch (e) {
			return failClaim(e, target);
		}
	},
	start: ({ request }) => transitionAction(request, (u, id) => claims.start(u, id)),
	done: ({ request }) => transitionAction(request, (u, id) => claims.complete(u, id)),
	release: ({ request }) => transitionAction(request, (u, id) => claims.release(u, id))
};
