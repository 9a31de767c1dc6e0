import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import { actorOf } from '$lib/server/platform/realtime';
import * as duty from '$lib/server/duty/paging';

const DAY_MS = 24 * 3600_000;

export const load: PageServerLoad = ({ locals, depends }) => {
	requirePermission('board.view');
	depends('app:roster');
	const now = new Date();
	const canManage = can({ user: locals.user }, 'shifts.manage');
	const current = new Set(duty.onShift(now).map((s) => s.shiftId));
	const shifts = duty.listShifts(new Date(now.getTime() - 2 * DAY_MS), new Date(now.getTime() + 14 * DAY_MS)).map((s) => ({
		id: s.id,
		name: s.name,
		startsAt: s.startsAt.toISOString(),
		endsAt: s.endsAt.toISOString(),
		rank: s.rank,
		handoverNote: s.handoverNote,
		current: current.has(s.id),
		mine: s.userId === locals.user!.id
	}));
	return {
		shifts,
		canManage,
		people: canManage ? duty.rosterablePeople().map((p) => ({ id: p.userId, name: p.name })) : [],
		escalateAfterMin: duty.escalateAfterMin(),
		now: now.toISOString()
	};
};

/** `datetime-local` values carry no zone; the roster is kept in UTC, as the page says. */
const utcInstant = (label: string) =>
	z
		.string({ error: `Enter the ${label} time.` })
		.trim()
		.regex(/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}(:\d{2})?$/, `Enter the ${label} time as YYYY-MM-DD HH:MM (UTC).`)
		.transform((v) => new Date(`${v}Z`))
		.refine((d) => !Number.isNaN(d.getTime()), `Enter a real ${label} time.`);

const addSchema = z.object({
	userId: z.string({ error: 'Choose a person.' }).min(1, 'Choose a person.'),
	startsAt: utcInstant('start'),
	endsAt: utcInstant('end'),
	rank: z.coerce.number({ error: 'Rank is a whole number from 0 to 20.' }).int('Rank is a whole number from 0 to 20.').min(0, 'Rank is a whole number from 0 to 20.').max(20, 'Rank is a whole number from 0 to 20.'),
	handoverNote: z.string().trim().max(2000, 'At most 2000 characters.').default('')
});
const shiftIdSchema = z.object({ shiftId: z.string({ error: 'Choose a shift.' }).min(1, 'Choose a shift.') });
const handoverSchema = shiftIdSchema.extend({ handoverNote: z.string({ error: 'Write a note.' }).trim().max(2000, 'At most 2000 characters.') });

export const actions: Actions = {
	add: async ({ request }) => {
		const user = requireUser('shifts.manage');
		const { data, form, failure } = await validateForm(request, addSchema);
		if (failure) return failure;
		try {
			duty.addShift(actorOf(user), data);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'Shift added.' };
	},
	remove: async ({ request }) => {
		const user = requireUser('shifts.manage');
		const { data, form, failure } = await validateForm(request, shiftIdSchema);
		if (failure) return failure;
		try {
			duty.removeShift(actorOf(user), data.shiftId);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'Shift removed.' };
	},
	handover: async ({ request }) => {
		const user = requireUser('board.view');
		const { data, form, failure } = await validateForm(request, handoverSchema);
		if (failure) return failure;
		try {
			duty.setHandoverNote(user, data.shiftId, data.handoverNote);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'Hand-over note saved.' };
	}
};
