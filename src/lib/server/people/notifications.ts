/**
 * Per-person e-mail preferences and the one door every notification goes through.
 *
 * A sender calls `notify(person, kind, eventClass, mail)`; `deliveryFor` decides from the person's
 * stored preferences ('now', 'digest', 'later' = held until their quiet hours end, 'none'). Duty
 * pages are always 'now'. Mails sent now get a footer: an unsubscribe link for that person and
 * kind (a signed token, `unsubscribe.ts`) and the List-Unsubscribe header, or for duty pages a
 * pointer to the preferences, since pages cannot be switched off. Waiting mails sit in the outbox
 * until the periodic flush sends them (held ones at the end of the quiet hours, digests one
 * period after the oldest thing waiting in them).
 *
 * Account mails (invitations, password resets) do not come through here: they are always sent.
 */
import { and, asc, eq, isNotNull, isNull, lt } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { sendMail, type OutgoingMail } from '../platform/mail';
import { config } from '../platform/config';
import { every } from '../platform/periodic';
import { restartService } from '../platform/services';
import { DomainError } from '../platform/errors';
import { randomId } from './auth';
import { unsubscribeLink, unsubscribeOffer, type UnsubscribeOffer } from './unsubscribe';
import {
	CHOOSABLE_KINDS,
	decideDelivery,
	DEFAULT_PREFERENCES,
	DIGEST_PERIODS_MIN,
	inQuietHours,
	isTime,
	isTimeZone,
	KIND_CHOICES,
	KIND_INFO,
	quietHoursEnd,
	SOURCE_CLASSES,
	type Delivery,
	type NotificationKind,
	type NotificationPreferences,
	type SourceClass
} from '../../notifications.ts';
import { dominantClass } from '../../alerts/display.ts';

/** How often waiting mails are looked at. */
export const OUTBOX_CHECK_MS = 60_000;
/** Sent outbox rows are kept this long (to see what went out), then removed. */
const SENT_KEPT_MS = 7 * 24 * 3600_000;

export class PreferencesError extends DomainError {
	constructor(message: string, fields: Record<string, string>) {
		super(422, 'invalid', message, fields);
	}
}

export interface Addressee {
	userId: string;
	name: string;
	email: string;
}

/** The most probable class of an event's classification, or null when it gives none. */
export function eventClassOf(classification: Partial<Record<SourceClass, number | null>> | null | undefined): SourceClass | null {
	return dominantClass(classification as Parameters<typeof dominantClass>[0])?.name ?? null;
}

export function preferencesLink(): string {
	return `${config.publicUrl}/account#notifications`;
}

// ───────────────────────────── Preferences ─────────────────────────────

export function preferencesOf(userId: string): NotificationPreferences {
	const row = db.select().from(table.notificationPreference).where(eq(table.notificationPreference.userId, userId)).get();
	if (!row) return { ...DEFAULT_PREFERENCES, kinds: {} };
	return {
		kinds: row.kinds ?? {},
		eventClasses: row.eventClasses ?? null,
		quietHours: row.quietStart && row.quietEnd ? { start: row.quietStart, end: row.quietEnd, timeZone: row.timeZone, action: row.quietAction } : null,
		digestPeriodMin: row.digestPeriodMin
	};
}

/** Refuses preferences that break a rule, naming the field as the form does. */
function checkPreferences(p: NotificationPreferences): void {
	const fields: Record<string, string> = {};
	for (const [kind, choice] of Object.entries(p.kinds)) {
		if (!(CHOOSABLE_KINDS as readonly string[]).includes(kind)) fields[`kind.${kind}`] = 'Duty pages cannot be switched off or delayed.';
		else if (!(KIND_CHOICES as readonly string[]).includes(choice)) fields[`kind.${kind}`] = 'Choose at once, in the digest, or off.';
		else if (choice === 'digest' && KIND_INFO[kind as NotificationKind].urgent) fields[`kind.${kind}`] = 'Safety notices go at once or not at all.';
	}
	if (p.eventClasses) {
		if (p.eventClasses.length === 0) fields.eventClasses = 'Choose at least one class, or all events.';
		else if (p.eventClasses.some((c) => !(SOURCE_CLASSES as readonly string[]).includes(c))) fields.eventClasses = 'Unknown source class.';
	}
	if (p.quietHours) {
		const q = p.quietHours;
		if (!isTime(q.start)) fields.quietStart = 'Give the start as HH:MM (24-hour clock).';
		if (!isTime(q.end)) fields.quietEnd = 'Give the end as HH:MM (24-hour clock).';
		if (isTime(q.start) && q.start === q.end) fields.quietEnd = 'The quiet hours must end at another time than they start.';
		if (!isTimeZone(q.timeZone)) fields.timeZone = `“${q.timeZone}” is not a time zone we know: use a name like Europe/Madrid, America/Santiago or UTC.`;
	}
	if (!(DIGEST_PERIODS_MIN as readonly number[]).includes(p.digestPeriodMin)) fields.digestPeriodMin = 'Choose one of the digest periods offered.';
	if (Object.keys(fields).length) throw new PreferencesError('Some preferences could not be saved.', fields);
}

export function savePreferences(userId: string, p: NotificationPreferences, now = new Date()): void {
	checkPreferences(p);
	const values = {
		kinds: p.kinds,
		eventClasses: p.eventClasses,
		quietStart: p.quietHours?.start ?? null,
		quietEnd: p.quietHours?.end ?? null,
		timeZone: p.quietHours?.timeZone ?? 'UTC',
		quietAction: p.quietHours?.action ?? 'hold',
		digestPeriodMin: p.digestPeriodMin,
		updatedAt: now
	};
	db.insert(table.notificationPreference)
		.values({ userId, ...values })
		.onConflictDoUpdate({ target: table.notificationPreference.userId, set: values })
		.run();
}

/** Switch one kind off for one person, keeping the rest of their preferences. Returns false when it was off already. */
export function switchOff(userId: string, kinds: NotificationKind[], now = new Date()): boolean {
	const p = preferencesOf(userId);
	const changed = kinds.filter((k) => !KIND_INFO[k].page && p.kinds[k] !== 'off');
	if (changed.length === 0) return false;
	for (const k of changed) p.kinds[k] = 'off';
	savePreferences(userId, p, now);
	return true;
}

/** What an unsubscribe link would switch off (refuses a tampered or unknown link). Needs no sign-in. */
export function unsubscribePreview(token: string): UnsubscribeOffer {
	const { userId: _userId, ...offer } = unsubscribeOffer(token, (id) => preferencesOf(id).kinds);
	return offer;
}

/** Confirming an unsubscribe link: switches off only that person's kind(s) the link names. */
export function unsubscribeWithToken(token: string, now = new Date()): UnsubscribeOffer {
	const { userId, ...offer } = unsubscribeOffer(token, (id) => preferencesOf(id).kinds);
	switchOff(userId, offer.kinds, now);
	return offer;
}

// ───────────────────────────── Deciding and sending ─────────────────────────────

/** How a mail of `kind` about an event of `eventClass` reaches this person now (rules in `decideDelivery`). */
export function deliveryFor(personId: string, kind: NotificationKind, eventClass: SourceClass | null, now = new Date()): Delivery {
	if (KIND_INFO[kind].page) return 'now';
	return decideDelivery(preferencesOf(personId), kind, eventClass, now);
}

/** The footer and headers of a mail sent now: the unsubscribe link, or for pages the way to the preferences. */
function withFooter(to: Addressee, kind: NotificationKind | 'digest', mail: { subject: string; text: string }): OutgoingMail {
	if (kind !== 'digest' && KIND_INFO[kind].page) {
		const footer = ['', '—', `Duty pages cannot be switched off. Your other e-mail from Strainline is set here: ${preferencesLink()}`];
		return { to: to.email, subject: mail.subject, text: [mail.text, ...footer].join('\n') };
	}
	const link = unsubscribeLink(to.userId, kind);
	const what = kind === 'digest' ? 'everything that goes to your digest' : `“${KIND_INFO[kind].label}”`;
	const footer = ['', '—', `Your e-mail preferences: ${preferencesLink()}`, `Stop ${what} with one click: ${link}`];
	return {
		to: to.email,
		subject: mail.subject,
		text: [mail.text, ...footer].join('\n'),
		// RFC 2369: the mail client opens the link, which asks for a confirmation. One-click (RFC 8058,
		// List-Unsubscribe-Post) is not offered: the provider's POST carries no Origin header, and
		// SvelteKit refuses cross-site form posts before any hook runs.
		headers: { 'List-Unsubscribe': `<${link}>` }
	};
}

/**
 * Hand one notification to a person as their preferences say: send it now (a failure is thrown,
 * as `sendMail` does), keep it for the digest or for the end of the quiet hours, or drop it.
 * Returns what was decided.
 */
export async function notify(
	to: Addressee,
	kind: NotificationKind,
	eventClass: SourceClass | null,
	mail: { subject: string; text: string },
	now = new Date()
): Promise<Delivery> {
	const delivery = deliveryFor(to.userId, kind, eventClass, now);
	if (delivery === 'none') return delivery;
	if (delivery === 'now') {
		await sendMail(withFooter(to, kind, mail));
		return delivery;
	}
	const quiet = preferencesOf(to.userId).quietHours;
	db.insert(table.notificationOutbox)
		.values({
			id: randomId(),
			userId: to.userId,
			kind,
			mode: delivery === 'digest' ? 'digest' : 'held',
			subject: mail.subject,
			text: mail.text,
			releaseAt: delivery === 'later' && quiet ? quietHoursEnd(quiet, now) : null,
			createdAt: now
		})
		.run();
	return delivery;
}

/** What waits for a person: digest items and held mails, oldest first. */
export function waitingFor(userId: string): table.NotificationOutboxRow[] {
	return db
		.select()
		.from(table.notificationOutbox)
		.where(and(eq(table.notificationOutbox.userId, userId), isNull(table.notificationOutbox.sentAt)))
		.orderBy(asc(table.notificationOutbox.createdAt))
		.all();
}

const utc = (d: Date) => d.toISOString().replace('T', ' ').slice(0, 16) + ' UTC';

export function composeDigest(to: Addressee, items: table.NotificationOutboxRow[]): { subject: string; text: string } {
	const since = items[0].createdAt;
	const lines = [
		`${to.name},`,
		'',
		`${items.length} message${items.length === 1 ? '' : 's'} since ${utc(since)}, oldest first.`,
		'Alerts can be retracted: check the event page before acting on anything below.'
	];
	for (const item of items) {
		lines.push('', `── ${item.subject}`, `   ${utc(item.createdAt)} · ${KIND_INFO[item.kind].label}`, '', item.text);
	}
	return { subject: `Strainline digest: ${items.length} message${items.length === 1 ? '' : 's'} since ${utc(since)}`, text: lines.join('\n') };
}

/** Marks rows sent unless another flush took them; returns the rows this call took. */
function take(rows: table.NotificationOutboxRow[], now: Date): table.NotificationOutboxRow[] {
	return rows.filter(
		(r) =>
			db
				.update(table.notificationOutbox)
				.set({ sentAt: now })
				.where(and(eq(table.notificationOutbox.id, r.id), isNull(table.notificationOutbox.sentAt)))
				.run().changes > 0
	);
}

function giveBack(rows: table.NotificationOutboxRow[]): void {
	for (const r of rows) db.update(table.notificationOutbox).set({ sentAt: null }).where(eq(table.notificationOutbox.id, r.id)).run();
}

/**
 * Send what is due: held mails whose quiet hours are over (one by one, as they would have gone),
 * and each person's digest once its oldest item has waited a whole digest period and they are
 * not in quiet hours. A kind switched off meanwhile is dropped. A failed send is put back for the
 * next check. Returns the number of mails sent.
 */
export async function flushOutbox(now = new Date()): Promise<number> {
	const waiting = db
		.select({ row: table.notificationOutbox, name: table.user.name, email: table.user.email, disabledAt: table.user.disabledAt })
		.from(table.notificationOutbox)
		.innerJoin(table.user, eq(table.user.id, table.notificationOutbox.userId))
		.where(isNull(table.notificationOutbox.sentAt))
		.orderBy(asc(table.notificationOutbox.createdAt))
		.all();
	const byPerson = new Map<string, { to: Addressee; disabled: boolean; rows: table.NotificationOutboxRow[] }>();
	for (const w of waiting) {
		const entry = byPerson.get(w.row.userId) ?? { to: { userId: w.row.userId, name: w.name, email: w.email }, disabled: !!w.disabledAt, rows: [] };
		entry.rows.push(w.row);
		byPerson.set(w.row.userId, entry);
	}
	let sent = 0;
	for (const { to, disabled, rows } of byPerson.values()) {
		const prefs = preferencesOf(to.userId);
		const dropped = rows.filter((r) => disabled || prefs.kinds[r.kind] === 'off');
		for (const r of dropped) db.delete(table.notificationOutbox).where(eq(table.notificationOutbox.id, r.id)).run();
		const live = rows.filter((r) => !dropped.includes(r));

		for (const r of take(live.filter((r) => r.mode === 'held' && r.releaseAt && r.releaseAt.getTime() <= now.getTime()), now)) {
			try {
				await sendMail(withFooter(to, r.kind, r));
				sent++;
			} catch (e) {
				console.error(`held mail to ${to.email} failed`, e);
				giveBack([r]);
			}
		}

		const digest = live.filter((r) => r.mode === 'digest');
		if (digest.length === 0 || inQuietHours(prefs.quietHours, now)) continue;
		if (now.getTime() - digest[0].createdAt.getTime() < prefs.digestPeriodMin * 60_000) continue;
		const taken = take(digest, now);
		if (taken.length === 0) continue;
		try {
			await sendMail(withFooter(to, 'digest', composeDigest(to, taken)));
			sent++;
		} catch (e) {
			console.error(`digest to ${to.email} failed`, e);
			giveBack(taken);
		}
	}
	db.delete(table.notificationOutbox)
		.where(and(isNotNull(table.notificationOutbox.sentAt), lt(table.notificationOutbox.sentAt, new Date(now.getTime() - SENT_KEPT_MS))))
		.run();
	return sent;
}

/** Start the periodic outbox check (null: none, for tests that call `flushOutbox`). Installing twice replaces the first. */
export function installNotifications(o: { everyMs?: number | null } = {}): () => void {
	const everyMs = o.everyMs === undefined ? OUTBOX_CHECK_MS : o.everyMs;
	return restartService('notifications', () => {
		const stop = everyMs === null ? null : every(everyMs, () => flushOutbox(), 'notification outbox');
		return { stop: () => stop?.() };
	});
}
