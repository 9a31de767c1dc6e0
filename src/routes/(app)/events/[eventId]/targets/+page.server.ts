import { error, fail } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import * as claims from '$lib/server/coordination/claims';
import { failFromError, validateForm } from '$lib/server/platform/forms';
import { parseTargetQuery, targetsPageData } from '$lib/server/targeting/filters';
import { LAPSE_MINUTES_MAX, LAPSE_MINUTES_MIN } from '$lib/limits';
import { claimsOutsideRanking, eventCatalogView, switchEventCatalog } from '$lib/server/targeting/event-catalog';
import { can } from '$lib/server/people/permissions';

export const load: PageServerLoad = ({ params, url, depends, locals }) => {
	requirePermission('events.view');
	depends('app:targets');
	const data = targetsPageData(params.eventId, parseTargetQuery(url.searchParams), locals.user ?? null);
	if (!data) error(404, 'No such event.');
	return {
		...data,
		catalog: { ...eventCatalogView(params.eventId)!, canSwitch: can({ user: locals.user }, 'targets.catalog') },
		// Claims whose targets a re-ranking left out: listed apart so that nobody loses sight of them.
		outside: claimsOutsideRanking(params.eventId)
	};
};

const catalogForm = z.object({
	catalogId: z.string({ error: 'Choose a catalogue.' }).trim().min(1, 'Choose a catalogue.').max(64, 'Choose one of the catalogues listed.'),
	confirm: z.literal('yes', { error: 'Confirm the switch.' }).optional()
});

const claimForm = z.object({
	targetKind: z.enum(['galaxy', 'field']),
	targetId: z.string().trim().min(1).max(200),
	telescopeId: z.string().trim().min(1, 'Choose a telescope.')
});
const claimIdForm = z.object({ claimId: z.string().trim().min(1) });
const reassignForm = z.object({ claimId: z.string().trim().min(1, 'Which claim?'), telescopeId: z.string().trim().min(1, 'Choose the telescope to hand the claim to.') });
const LAPSE_RANGE = `Enter whole minutes from ${LAPSE_MINUTES_MIN} to ${LAPSE_MINUTES_MAX} (24 h).`;
const lapseForm = z.object({
	lapseMinutes: z
		.string({ error: LAPSE_RANGE })
		.trim()
		.regex(/^\d+$/, LAPSE_RANGE)
		.transform(Number)
		.pipe(z.number().int().min(LAPSE_MINUTES_MIN, LAPSE_RANGE).max(LAPSE_MINUTES_MAX, LAPSE_RANGE))
});

/** Claim errors become form failures with the server's wording, which names the holder. */
function failClaim(form: FormData, e: unknown, target?: string) {
	return failFromError(form, e, { extra: { target: target ?? null } });
}

async function transitionAction(request: Request, act: (user: import('$lib/server/people/auth').SessionUser, claimId: string) => unknown) {
	const user = requireUser('claims.create');
	const form = await request.formData();
	const parsed = claimIdForm.safeParse(Object.fromEntries(form));
	if (!parsed.success) return fail(400, { message: 'Which claim?', target: null });
	try {
		act(user, parsed.data.claimId);
		return { ok: true };
	} catch (e) {
		return failClaim(form, e);
	}
}

export const actions: Actions = {
	claim: async ({ request, params }) => {
		const user = requireUser('claims.create');
		const form = await request.formData();
		const parsed = claimForm.safeParse(Object.fromEntries(form));
		if (!parsed.success) return fail(400, { message: parsed.error.issues[0]?.message ?? 'Invalid claim.', target: null });
		const target = `${parsed.data.targetKind}:${parsed.data.targetId}`;
		try {
			claims.claim(user, { eventId: params.eventId, targetKind: parsed.data.targetKind, targetId: parsed.data.targetId, telescopeId: parsed.data.telescopeId });
			return { ok: true, target };
		} catch (e) {
			return failClaim(form, e, target);
		}
	},
	start: ({ request }) => transitionAction(request, (u, id) => claims.start(u, id)),
	done: ({ request }) => transitionAction(request, (u, id) => claims.complete(u, id)),
	release: ({ request }) => transitionAction(request, (u, id) => claims.release(u, id)),
	reassign: async ({ request }) => {
		const user = requireUser('claims.manage');
		const form = await request.formData();
		const parsed = reassignForm.safeParse(Object.fromEntries(form));
		if (!parsed.success) return fail(400, { message: parsed.error.issues[0]?.message ?? 'Which claim, to which telescope?', target: null });
		try {
			claims.reassign(user, parsed.data.claimId, parsed.data.telescopeId);
			return { ok: true, target: null };
		} catch (e) {
			return failClaim(form, e);
		}
	},
	/** Rank the event against another catalogue; a live event asks for confirmation first (answered with `confirmCatalog`). */
	catalog: async ({ request, params }) => {
		const user = requireUser('targets.catalog');
		const v = await validateForm(request, catalogForm);
		if (v.failure) return v.failure;
		try {
			const out = switchEventCatalog(user, params.eventId, v.data.catalogId, { confirmed: v.data.confirm === 'yes' });
			return out.switched ? { catalogSwitched: out.preview } : { confirmCatalog: out.preview };
		} catch (e) {
			return failFromError(v.form, e);
		}
	},
	lapse: async ({ request, params }) => {
		const user = requireUser('claims.manage');
		const v = await validateForm(request, lapseForm);
		if (v.failure) return v.failure;
		try {
			claims.setLapseMinutes(user, params.eventId, v.data.lapseMinutes);
		} catch (e) {
			return failFromError(v.form, e, { field: 'lapseMinutes' });
		}
		return { lapseSaved: v.data.lapseMinutes };
	}
};
