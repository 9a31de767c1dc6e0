/**
 * What a person is e-mailed about, and when: the kinds of e-mail the app sends, the choices a
 * person has for each, and the rule that turns their preferences into a delivery decision.
 * Shared by the server and the account page. Pure: no I/O, no server imports.
 *
 * Account mails (invitations, password resets) are not notifications: they are always sent.
 */
import { SOURCE_CLASSES, type SourceClass } from './alerts/display.ts';

export { SOURCE_CLASSES, type SourceClass };

export const NOTIFICATION_KINDS = [
	'duty.page',
	'duty.stand-down',
	'claims.retracted',
	'claim.lapsed',
	'claims.moved',
	'candidate.kilonova-like',
	'candidate.classified'
] as const;
export type NotificationKind = (typeof NOTIFICATION_KINDS)[number];

export interface KindInfo {
	label: string;
	/** What the mail is about, in the preferences form and on the unsubscribe page. */
	description: string;
	/** Duty pages: sent at once whatever the preferences say; no unsubscribe link. */
	page: boolean;
	/** Safety notices: never held by quiet hours, never put in a digest, never filtered by event class; only switching them off stops them. */
	urgent: boolean;
}

export const KIND_INFO: Record<NotificationKind, KindInfo> = {
	'duty.page': {
		label: 'Duty pages and escalations',
		description: 'A significant notice needs the acknowledgement of the duty scientist on shift.',
		page: true,
		urgent: true
	},
	'duty.stand-down': {
		label: 'Stand-downs after a retraction',
		description: 'An event you were paged for was retracted: stop observing it.',
		page: true,
		urgent: true
	},
	'claims.retracted': {
		label: 'Claims released by a retraction',
		description: 'Your team’s claims were released because the event was retracted.',
		page: false,
		urgent: true
	},
	'claim.lapsed': {
		label: 'Lapsed claims',
		description: 'A claim of your team was not started in time and the target is free again.',
		page: false,
		urgent: false
	},
	'claims.moved': {
		label: 'Claimed targets moved by a new ranking',
		description: 'A new sky map or catalogue moved targets your team holds claims on.',
		page: false,
		urgent: false
	},
	'candidate.kilonova-like': {
		label: 'Kilonova-like candidates',
		description: 'The rules call a candidate kilonova-like for the first time.',
		page: false,
		urgent: false
	},
	'candidate.classified': {
		label: 'Candidate classifications',
		description: 'Someone classified a candidate from its spectrum.',
		page: false,
		urgent: false
	}
};

/** The kinds a person may choose for; duty pages are not among them. */
export type ChoosableKind = Exclude<NotificationKind, 'duty.page' | 'duty.stand-down'>;
export const CHOOSABLE_KINDS = NOTIFICATION_KINDS.filter((k): k is ChoosableKind => !KIND_INFO[k].page);

export const KIND_CHOICES = ['now', 'digest', 'off'] as const;
export type KindChoice = (typeof KIND_CHOICES)[number];
export const KIND_CHOICE_LABELS: Record<KindChoice, string> = { now: 'At once', digest: 'In the digest', off: 'Off' };

export const QUIET_ACTIONS = ['hold', 'digest'] as const;
export type QuietAction = (typeof QUIET_ACTIONS)[number];

/** Digest periods offered, minutes. */
export const DIGEST_PERIODS_MIN = [60, 180, 360, 720, 1440] as const;
export const DIGEST_PERIOD_LABELS: Record<number, string> = { 60: 'Hourly', 180: 'Every 3 hours', 360: 'Every 6 hours', 720: 'Every 12 hours', 1440: 'Daily' };

export interface QuietHours {
	/** Local "HH:MM" in `timeZone`; start after end means the quiet hours run across midnight. */
	start: string;
	end: string;
	/** IANA zone name ("Europe/Madrid") or "UTC". */
	timeZone: string;
	/** During quiet hours, mails wait for the end ('hold') or go to the digest. */
	action: QuietAction;
}

export interface NotificationPreferences {
	/** Per kind; a kind not listed is sent at once (today's behaviour). */
	kinds: Partial<Record<NotificationKind, KindChoice>>;
	/** Only events whose most probable class is one of these; null = every event. */
	eventClasses: SourceClass[] | null;
	quietHours: QuietHours | null;
	digestPeriodMin: number;
}

/** Everything at once, every event, no quiet hours: what the app did before preferences existed. */
export const DEFAULT_PREFERENCES: NotificationPreferences = { kinds: {}, eventClasses: null, quietHours: null, digestPeriodMin: 60 };

export type Delivery = 'now' | 'digest' | 'later' | 'none';

const HHMM = /^([01]\d|2[0-3]):([0-5]\d)$/;

export function isTime(s: string): boolean {
	return HHMM.test(s);
}

/** Minutes after local midnight of "HH:MM". */
export function minutesOf(hhmm: string): number {
	const m = HHMM.exec(hhmm);
	if (!m) throw new Error(`not a time of day: ${hhmm}`);
	return Number(m[1]) * 60 + Number(m[2]);
}

export function isTimeZone(name: string): boolean {
	if (!name || name.length > 64) return false;
	try {
		new Intl.DateTimeFormat('en-GB', { timeZone: name });
		return true;
	} catch {
		return false;
	}
}

/** Minutes after local midnight of an instant in a zone (seconds dropped). */
export function localMinutes(at: Date, timeZone: string): number {
	const parts = new Intl.DateTimeFormat('en-GB', { timeZone, hour: '2-digit', minute: '2-digit', hourCycle: 'h23' }).formatToParts(at);
	const hour = Number(parts.find((p) => p.type === 'hour')?.value);
	const minute = Number(parts.find((p) => p.type === 'minute')?.value);
	return hour * 60 + minute;
}

/** Whether `at` falls in the quiet hours: [start, end) local time, across midnight when start > end. */
export function inQuietHours(q: QuietHours | null, at: Date): boolean {
	if (!q) return false;
	const start = minutesOf(q.start);
	const end = minutesOf(q.end);
	if (start === end) return false;
	const t = localMinutes(at, q.timeZone);
	return start < end ? t >= start && t < end : t >= start || t < end;
}

/**
 * The first instant at or after `at` when the quiet hours are over (the next local `end`). On a
 * night the zone changes its clocks the local time is corrected once, so the result is the
 * local end time on the wall clock.
 */
export function quietHoursEnd(q: QuietHours, at: Date): Date {
	const end = minutesOf(q.end);
	const whole = new Date(Math.floor(at.getTime() / 60_000) * 60_000);
	const ahead = (end - localMinutes(whole, q.timeZone) + 1440) % 1440;
	let out = new Date(whole.getTime() + ahead * 60_000);
	const off = localMinutes(out, q.timeZone) - end;
	if (off !== 0) {
		const shift = ((((-off + 720) % 1440) + 1440) % 1440) - 720;
		const corrected = new Date(out.getTime() + shift * 60_000);
		if (corrected.getTime() >= at.getTime()) out = corrected;
	}
	return out.getTime() < at.getTime() ? at : out;
}

/**
 * How one mail of `kind` about an event of `eventClass` (its most probable class; null when the
 * event gives none, or the mail is about no event) reaches a person with these preferences at `now`:
 * - duty pages: 'now', always — neither preferences nor quiet hours silence them;
 * - 'none' when the kind is off, or (except for urgent kinds) the event's class is not one they follow
 *   (an event without a class is never filtered out);
 * - urgent kinds that are on: 'now';
 * - a kind set to the digest: 'digest';
 * - otherwise 'now', or in quiet hours 'later' (held until they end) or 'digest', as chosen.
 */
export function decideDelivery(prefs: NotificationPreferences, kind: NotificationKind, eventClass: SourceClass | null, now: Date): Delivery {
	const info = KIND_INFO[kind];
	if (info.page) return 'now';
	const choice = prefs.kinds[kind] ?? 'now';
	if (choice === 'off') return 'none';
	if (info.urgent) return 'now';
	if (prefs.eventClasses && eventClass && !prefs.eventClasses.includes(eventClass)) return 'none';
	if (choice === 'digest') return 'digest';
	if (inQuietHours(prefs.quietHours, now)) return prefs.quietHours!.action === 'digest' ? 'digest' : 'later';
	return 'now';
}
