/**
 * Closing an event and reopening it. A coordinator closes an event with a reason (CLOSE_REASONS)
 * and an optional note; its open claims and spectrum takes are released (each logged), and new
 * pointings, claims, candidates, photometry and takes are refused while it is closed
 * (`assertEventOpen` in alerts/events.ts, asked by each of those stages). Reopening clears the
 * closure; the event returns to 'retracted' if the source had retracted it, else to 'active'.
 * Both are logged to the board and the event's room (`event.closed`, `event.reopened`).
 */
import { and, eq, ne } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import type { SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { actorOf, record } from '../platform/realtime';
import { DomainError } from '../platform/errors';
import { closureOf, getEvent, type EventDetail } from '../alerts/events';
import { releaseOpenClaims } from '../coordination/claims';
import { releaseOpenTakes } from '../candidates/takers';
import { CLOSE_REASONS, CLOSE_REASON_LABELS } from '../../event-view.ts';
import { CLOSE_NOTE_MAX_CHARS } from '../../limits.ts';
import '../../field-messages';

export class CloseoutError extends DomainError {}

const note = z
	.string()
	.trim()
	.max(CLOSE_NOTE_MAX_CHARS, `Note must be at most ${CLOSE_NOTE_MAX_CHARS} characters.`)
	.nullish()
	.transform((v) => (v ? v : null));

/** What closing takes: a reason (one of CLOSE_REASONS) and an optional note. */
export const closeInput = z.object({
	reason: z.enum(CLOSE_REASONS, { error: `Reason must be one of ${CLOSE_REASONS.join(', ')}.` }),
	note
});
export type CloseInput = z.input<typeof closeInput>;

/** What reopening takes: an optional note. */
export const reopenInput = z.object({ note });
export type ReopenInput = z.input<typeof reopenInput>;

function rooms(eventId: string) {
	return ['board', `event:${eventId}`] as const;
}

function eventRow(eventId: string): table.GwEvent {
	const e = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!e) throw new CloseoutError(404, 'not_found', `No event ${eventId || '(none given)'}.`);
	return e;
}

function invalid(error: z.ZodError): CloseoutError {
	const fields: Record<string, string> = {};
	for (const i of error.issues) fields[String(i.path[0] ?? 'body')] ??= i.message;
	return new CloseoutError(422, 'invalid', Object.values(fields).join(' '), fields);
}

export interface Closed {
	event: EventDetail;
	releasedClaimIds: string[];
	releasedTakeIds: string[];
}

/**
 * Close an event. Refusals as CloseoutError: 403 without `events.close`, 404 unknown event, 409
 * `already_closed` (naming who closed it and when), 422 a reason not in the list or a note too long.
 * A guarded update decides between two coordinators closing at once. After it, the event's open
 * claims are released ("event closed (…)") and its open spectrum takes ended, each logged.
 */
export function closeEvent(user: SessionUser, eventId: string, raw: CloseInput, now = new Date()): Closed {
	if (!can({ user }, 'events.close')) throw new CloseoutError(403, 'forbidden', 'Only a coordinator may close an event.');
	const parsed = closeInput.safeParse(raw ?? {});
	if (!parsed.success) throw invalid(parsed.error);
	const { reason, note } = parsed.data;
	const before = eventRow(eventId);
	const alreadyClosed = () => {
		const c = closureOf(eventRow(eventId));
		return new CloseoutError(
			409,
			'already_closed',
			c ? `This event was already closed by ${c.by ?? 'a coordinator'} at ${c.at.replace(/\.\d{3}Z$/, 'Z')} (${CLOSE_REASON_LABELS[c.reason].short}).` : 'This event is already closed.'
		);
	};
	if (before.state === 'closed') throw alreadyClosed();
	const changed = db
		.update(table.gwEvent)
		.set({ state: 'closed', closedAt: now, closeReason: reason, closeNote: note, closedBy: user.id, updatedAt: now })
		.where(and(eq(table.gwEvent.id, eventId), ne(table.gwEvent.state, 'closed')))
		.run().changes;
	if (changed !== 1) throw alreadyClosed();

	const actor = actorOf(user);
	for (const room of rooms(eventId)) record(actor, 'event.closed', room, { eventId, reason, note, by: user.name });
	const claims = releaseOpenClaims(eventId, `event closed (${CLOSE_REASON_LABELS[reason].short})`, actor, now);
	const takes = releaseOpenTakes(eventId, actor, now);
	return { event: getEvent(eventId)!, releasedClaimIds: claims.map((c) => c.id), releasedTakeIds: takes.map((t) => t.takeId) };
}

/**
 * Reopen a closed event: 403 without `events.close`, 404, 409 `not_closed`, 422 a note too long.
 * Claims and takes released at closing stay released; teams claim again.
 */
export function reopenEvent(user: SessionUser, eventId: string, raw: ReopenInput = {}, now = new Date()): EventDetail {
	if (!can({ user }, 'events.close')) throw new CloseoutError(403, 'forbidden', 'Only a coordinator may reopen an event.');
	const parsed = reopenInput.safeParse(raw ?? {});
	if (!parsed.success) throw invalid(parsed.error);
	const before = eventRow(eventId);
	if (before.state !== 'closed') throw new CloseoutError(409, 'not_closed', `This event is ${before.state}, not closed; there is nothing to reopen.`);
	const changed = db
		.update(table.gwEvent)
		.set({ state: before.retractedAt ? 'retracted' : 'active', closedAt: null, closeReason: null, closeNote: null, closedBy: null, updatedAt: now })
		.where(and(eq(table.gwEvent.id, eventId), eq(table.gwEvent.state, 'closed')))
		.run().changes;
	if (changed !== 1) throw new CloseoutError(409, 'not_closed', 'Someone reopened this event a moment ago.');
	const actor = actorOf(user);
	for (const room of rooms(eventId)) record(actor, 'event.reopened', room, { eventId, note: parsed.data.note, by: user.name });
	return getEvent(eventId)!;
}
