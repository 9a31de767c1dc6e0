/**
 * E-mail about candidates to the people who act on them: the duty scientist(s) on shift now
 * (every duty scientist when nobody is on the roster, as paging does) and the coordinators.
 * Sent when the rules first call a candidate kilonova-like and when a candidate is classified.
 */
import { and, asc, eq, isNull } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import type { OutgoingMail } from '../platform/mail';
import { notify } from '../people/notifications';
import type { NotificationKind, SourceClass } from '../../notifications.ts';
import { record, SYSTEM } from '../platform/realtime';
import { config } from '../platform/config';
import { dutyPeople, onShift } from '../duty/paging';

export interface Recipient {
	userId: string;
	name: string;
	email: string;
}

/** Duty scientists on shift now (all duty scientists when the roster is empty) and every coordinator, each once. */
export function candidateRecipients(now = new Date()): Recipient[] {
	const shift = onShift(now).map((s) => ({ userId: s.userId, name: s.name, email: s.email }));
	const duty = shift.length ? shift : dutyPeople();
	const coordinators = db
		.select({ userId: table.user.id, name: table.user.name, email: table.user.email })
		.from(table.userRole)
		.innerJoin(table.user, eq(table.user.id, table.userRole.userId))
		.where(and(eq(table.userRole.role, 'coordinator'), isNull(table.user.disabledAt)))
		.orderBy(asc(table.user.name))
		.all();
	const seen = new Set<string>();
	return [...duty, ...coordinators].filter((p) => (seen.has(p.userId) ? false : (seen.add(p.userId), true)));
}

export function candidateLink(eventId: string, name: string): string {
	return `${config.publicUrl}/events/${encodeURIComponent(eventId)}/candidates/${encodeURIComponent(name)}`;
}

/**
 * Send one message to each recipient, as each one's e-mail preferences say (`notify`: at once,
 * in their digest, after their quiet hours, or not at all). A failed delivery is logged (`candidate.mail-failed`) and
 * does not stop the others. Resolves when every message has been handed to the mail server.
 */
export async function mailRecipients(
	recipients: Recipient[],
	compose: (r: Recipient) => Omit<OutgoingMail, 'to'>,
	about: { eventId: string; candidateId: string },
	kind: Extract<NotificationKind, 'candidate.kilonova-like' | 'candidate.classified'>,
	eventClass: SourceClass | null
): Promise<number> {
	await Promise.all(
		recipients.map(async (r) => {
			try {
				await notify(r, kind, eventClass, compose(r));
			} catch (e) {
				console.error(`candidate mail to ${r.email} failed`, e);
				record(SYSTEM, 'candidate.mail-failed', `event:${about.eventId}`, { ...about, userId: r.userId, error: (e as Error).message });
			}
		})
	);
	return recipients.length;
}
