import { error, fail } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import * as claims from '$lib/server/coordination/claims';
import { failWith, validateForm } from '$lib/server/platform/forms';
import { parseTargetQuery, targetsPageData } from '$lib/server/targeting/filters';
import { claimsOutsideRanking, eventCatalogView, switchEventCatalog } from '$lib/server/targeting/event-catalog';
import { can } from '$lib/server/people/permissions';
import { DomainError } from '$lib/server/platform/errors';

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
const LAPSE_RANGE = 'Enter whole minutes from 5 to 1440 (24 h).';
const lapseForm = z.object({
	lapseMinutes: z
		.string({ error: LAPSE_RANGE })
		.trim()
		.regex(/^\d+$/, LAPSE_RANGE)
		.transform(Number)
		.pipe(z.number().int().min(5, LAPSE_RANGE).max(1440, LAPSE_RANGE))
});

/** Claim errors become form failures with the server's wording, which names the holder. */
function failClaim(e: unknown, target?: string) {
	if (e instanceof claims.ClaimError) return fail(e.status, { message: e.message, target: target ?? null });
	throw e;
}

async function transitionAction(request: Request, act: (user: import('$lib/server/people/auth').SessionUser, claimId: string) => unknown) {
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
	release: ({ request }) => transitionAction(request, (u, id) => claims.release(u, id)),
	reassign: async ({ request }) => {
		const user = requireUser('claims.manage');
		const parsed = reassignForm.safeParse(Object.fromEntries(await request.formData()));
		if (!parsed.success) return fail(400, { message: parsed.error.issues[0]?.message ?? 'Which claim, to which telescope?', target: null });
		try {
			claims.reassign(user, parsed.data.claimId, parsed.data.telescopeId);
			return { ok: true, target: null };
		} catch (e) {
			return failClaim(e);
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
			if (e instanceof DomainError) return failWith(v.form, e.fields, e.status, e.message);
			throw e;
		}
	},
	lapse: async ({ request, params }) => {
		const user = requireUser('claims.manage');
		const v = await validateForm(request, lapseForm);
		if (v.failure) return v.failure;
		try {
			claims.setLapseMinutes(user, params.eventId, v.data.lapseMinutes);
		} catch (e) {
			if (e instanceof claims.ClaimError) return failWith(v.form, { lapseMinutes: e.message }, e.status);
			throw e;
		}
		return { lapseSaved: v.data.lapseMinutes };
	}
};
