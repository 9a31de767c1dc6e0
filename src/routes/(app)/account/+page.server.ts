import { redirect } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requireUser } from '$lib/server/people/guard';
import { validateForm, failFromError } from '$lib/server/platform/forms';
import * as auth from '$lib/server/people/auth';
import * as people from '$lib/server/people/people';
import { newPasswordField } from '$lib/validation';
import * as notifications from '$lib/server/people/notifications';
import * as phone from '$lib/server/people/phone';
import { CHANNELS, type ChannelChoices } from '$lib/page-channels';
import {
	CHOOSABLE_KINDS,
	DIGEST_PERIODS_MIN,
	isTime,
	isTimeZone,
	KIND_CHOICES,
	KIND_INFO,
	QUIET_ACTIONS,
	SOURCE_CLASSES,
	type ChoosableKind,
	type KindChoice,
	type NotificationPreferences
} from '$lib/notifications';

export const load: PageServerLoad = ({ locals }) => {
	const user = requireUser('account.manage');
	const current = locals.session?.id;
	return {
		preferences: notifications.preferencesOf(user.id),
		waiting: notifications.waitingFor(user.id).length,
		phone: phone.phoneSettingsOf(user.id),
		pageKinds: phone.PAGE_KINDS,
		dutyScientist: user.roles.includes('duty'),
		sessions: auth
			.listSessions(user.id)
			.map((s) => ({ ...s, current: s.id === current, id: s.id.slice(0, 12) }))
			.sort((a, b) => Number(b.current) - Number(a.current))
	};
};

const passwordSchema = z
	.object({
		currentPassword: z.string({ error: 'Enter your current password.' }).min(1, 'Enter your current password.'),
		password: newPasswordField,
		confirm: z.string({ error: 'Repeat the password.' })
	})
	.refine((v) => v.password === v.confirm, { path: ['confirm'], message: 'The two passwords differ.' });

const kindFields = Object.fromEntries(
	CHOOSABLE_KINDS.map((k) => [
		`kind.${k}`,
		KIND_INFO[k].urgent
			? z.enum(['now', 'off'], { error: `Choose whether “${KIND_INFO[k].label}” reach you at once or not at all.` })
			: z.enum(KIND_CHOICES, { error: `Choose how “${KIND_INFO[k].label}” reach you.` })
	])
) as unknown as Record<`kind.${ChoosableKind}`, z.ZodType<KindChoice>>;

const preferencesSchema = z
	.object({
		...kindFields,
		classes: z.enum(['all', 'some'], { error: 'Choose all events, or some classes.' }),
		eventClasses: z.array(z.enum(SOURCE_CLASSES, { error: 'Unknown source class.' })),
		quiet: z.literal('on').optional(),
		quietStart: z.string().trim().optional(),
		quietEnd: z.string().trim().optional(),
		timeZone: z.string().trim().max(64, 'A time zone name has at most 64 characters.').optional(),
		quietAction: z.enum(QUIET_ACTIONS, { error: 'Choose what happens to mail during quiet hours.' }).optional(),
		digestPeriodMin: z.coerce
			.number({ error: 'Choose how often the digest comes.' })
			.refine((n) => (DIGEST_PERIODS_MIN as readonly number[]).includes(n), 'Choose one of the digest periods offered.')
	})
	.superRefine((v, ctx) => {
		if (v.classes === 'some' && v.eventClasses.length === 0)
			ctx.addIssue({ code: 'custom', path: ['eventClasses'], message: 'Choose at least one class, or all events.' });
		if (v.quiet !== 'on') return;
		if (!v.quietStart || !isTime(v.quietStart)) ctx.addIssue({ code: 'custom', path: ['quietStart'], message: 'Give the start as HH:MM (24-hour clock).' });
		if (!v.quietEnd || !isTime(v.quietEnd)) ctx.addIssue({ code: 'custom', path: ['quietEnd'], message: 'Give the end as HH:MM (24-hour clock).' });
		else if (v.quietStart === v.quietEnd) ctx.addIssue({ code: 'custom', path: ['quietEnd'], message: 'The quiet hours must end at another time than they start.' });
		if (!v.timeZone) ctx.addIssue({ code: 'custom', path: ['timeZone'], message: 'Give a time zone, e.g. UTC or Europe/Madrid.' });
		else if (!isTimeZone(v.timeZone))
			ctx.addIssue({ code: 'custom', path: ['timeZone'], message: `“${v.timeZone}” is not a time zone we know: use a name like Europe/Madrid, America/Santiago or UTC.` });
		if (!v.quietAction) ctx.addIssue({ code: 'custom', path: ['quietAction'], message: 'Choose what happens to mail during quiet hours.' });
	});

const phoneSchema = z.object({
	phone: z.string({ error: 'Give your phone number.' }).trim().min(1, 'Give your phone number.').max(40, 'A phone number has at most 15 digits: this is far too long.')
});
const codeSchema = z.object({
	code: z.string({ error: 'Type the code from the text message.' }).trim().min(1, 'Type the code from the text message.').max(12, 'The code has six digits.')
});
const channelsSchema = z.object(
	Object.fromEntries(phone.PAGE_KINDS.map((k) => [`channel.${k}`, z.array(z.enum(CHANNELS, { error: 'Choose e-mail, text message or voice call.' })).max(CHANNELS.length)]))
);

export const actions: Actions = {
	phone: async ({ request }) => {
		const user = requireUser('account.manage');
		const { data, form, failure } = await validateForm(request, phoneSchema);
		if (failure) return failure;
		try {
			const number = await phone.requestVerification(user.id, data.phone);
			return { done: `A code was texted to ${number}: type it below to verify the number.`, section: 'phone' };
		} catch (e) {
			return failFromError(form, e, { field: 'phone' });
		}
	},
	verifyPhone: async ({ request }) => {
		const user = requireUser('account.manage');
		const { data, form, failure } = await validateForm(request, codeSchema);
		if (failure) return failure;
		try {
			const number = phone.verifyCode(user.id, data.code);
			return { done: `${number} is verified: pages can now reach you by text or voice.`, section: 'phone' };
		} catch (e) {
			return failFromError(form, e, { field: 'code' });
		}
	},
	channels: async ({ request }) => {
		const user = requireUser('account.manage');
		const fields = phone.PAGE_KINDS.map((k) => `channel.${k}`);
		const { data, form, failure } = await validateForm(request, channelsSchema, fields);
		if (failure) return failure;
		const choices: ChannelChoices = Object.fromEntries(phone.PAGE_KINDS.map((k) => [k, (data as Record<string, (typeof CHANNELS)[number][]>)[`channel.${k}`]]));
		try {
			phone.saveChannels(user, choices);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'How pages reach you is saved.', section: 'phone' };
	},
	notifications: async ({ request }) => {
		const user = requireUser('account.manage');
		const { data, form, failure } = await validateForm(request, preferencesSchema, ['eventClasses']);
		if (failure) return failure;
		const preferences: NotificationPreferences = {
			kinds: Object.fromEntries(CHOOSABLE_KINDS.map((k) => [k, data[`kind.${k}`]])),
			eventClasses: data.classes === 'all' ? null : data.eventClasses,
			quietHours:
				data.quiet === 'on' ? { start: data.quietStart!, end: data.quietEnd!, timeZone: data.timeZone!, action: data.quietAction! } : null,
			digestPeriodMin: data.digestPeriodMin
		};
		try {
			notifications.savePreferences(user.id, preferences);
		} catch (e) {
			return failFromError(form, e);
		}
		return { done: 'E-mail preferences saved.', section: 'notifications' };
	},
	password: async ({ request, locals }) => {
		const user = requireUser('account.manage');
		const { data, form, failure } = await validateForm(request, passwordSchema);
		if (failure) return failure;
		try {
			await people.changePassword(user.id, data.currentPassword, data.password, locals.session!.id);
		} catch (e) {
			return failFromError(form, e, { field: 'currentPassword' });
		}
		return { done: 'Password changed. Your other sessions were signed out.' };
	},
	signOutOthers: ({ locals }) => {
		const user = requireUser('account.manage');
		const n = auth.invalidateUserSessions(user.id, locals.session?.id);
		return { done: `Signed out ${n} other session${n === 1 ? '' : 's'}.` };
	},
	signOutEverywhere: (event) => {
		const user = requireUser('account.manage');
		auth.invalidateUserSessions(user.id);
		auth.deleteSessionTokenCookie(event);
		redirect(303, '/sign-in');
	}
};
