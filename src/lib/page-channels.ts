/**
 * How pages reach a person: by e-mail, by text message or by a voice call that reads a short
 * message. Shared by the server and the account page. Pure: no I/O, no server imports.
 */
import { NOTIFICATION_KINDS, type NotificationKind } from './notifications.ts';

export const CHANNELS = ['email', 'sms', 'voice'] as const;
export type Channel = (typeof CHANNELS)[number];
export const CHANNEL_LABELS: Record<Channel, string> = { email: 'E-mail', sms: 'Text message', voice: 'Voice call' };

/** Per kind of notification, the channels chosen; a kind not listed goes by e-mail only. */
export type ChannelChoices = Partial<Record<NotificationKind, Channel[]>>;

/** The kinds a duty scientist must receive by at least two channels. */
export const DUTY_KINDS: readonly NotificationKind[] = ['duty.page'];
export const DUTY_MIN_CHANNELS = 2;

/** ITU-T E.164: a plus sign, a country code that does not start with 0, at most 15 digits in all. */
const E164 = /^\+[1-9]\d{6,14}$/;

/**
 * A phone number as typed ("+34 600 12-34-56", "(+34) 600123456") reduced to E.164, or null when
 * it is not one. Spaces, dots, dashes and brackets are dropped; nothing else is guessed (no
 * national numbers: we cannot know the country).
 */
export function toE164(typed: string): string | null {
	if (typed.length > 40) return null;
	const compact = typed.trim().replace(/[\s.\-()]/g, '');
	return E164.test(compact) ? compact : null;
}

export const E164_HELP = 'Give the number in international form: a plus sign, the country code and the number, e.g. +34 600 123 456 (7 to 15 digits).';

/** The channels a person uses for `kind`: their choice, or e-mail alone. */
export function channelsOf(choices: ChannelChoices, kind: NotificationKind): Channel[] {
	const chosen = choices[kind]?.filter((c) => (CHANNELS as readonly string[]).includes(c));
	return chosen && chosen.length ? [...new Set(chosen)] : ['email'];
}

/**
 * Problems with a set of choices, by kind: an empty choice, a phone channel without a verified
 * number, or fewer than two channels for duty pages when the person is a duty scientist.
 */
export function channelProblems(choices: ChannelChoices, o: { verifiedPhone: boolean; dutyScientist: boolean }): Partial<Record<NotificationKind, string>> {
	const out: Partial<Record<NotificationKind, string>> = {};
	for (const kind of NOTIFICATION_KINDS) {
		const chosen = choices[kind];
		if (chosen === undefined) continue;
		if (chosen.some((c) => !(CHANNELS as readonly string[]).includes(c))) out[kind] = 'Choose e-mail, text message or voice call.';
		else if (chosen.length === 0) out[kind] = 'Choose at least one way to reach you.';
		else if (!o.verifiedPhone && chosen.some((c) => c !== 'email')) out[kind] = 'Text and voice need a verified phone number: add and verify one above first.';
		else if (o.dutyScientist && DUTY_KINDS.includes(kind) && new Set(chosen).size < DUTY_MIN_CHANNELS)
			out[kind] = 'Duty pages must reach you by at least two ways (for example e-mail and text), so that one failing does not leave a page unseen.';
	}
	return out;
}

/**
 * The channels a page actually goes by at send time. A duty page always goes by at least two:
 * e-mail is added when missing, and with a verified number a text when only one remains.
 */
export function sendChannels(choices: ChannelChoices, kind: NotificationKind, o: { verifiedPhone: boolean }): Channel[] {
	let chosen = channelsOf(choices, kind).filter((c) => c === 'email' || o.verifiedPhone);
	if (chosen.length === 0) chosen = ['email'];
	if (DUTY_KINDS.includes(kind)) {
		if (!chosen.includes('email')) chosen = ['email', ...chosen];
		if (chosen.length < DUTY_MIN_CHANNELS && o.verifiedPhone) chosen.push('sms');
	}
	return chosen;
}
