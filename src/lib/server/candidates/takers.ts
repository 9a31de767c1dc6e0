/**
 * Who is getting a spectrum of a candidate. One person at a time holds a candidate ("taken"); the
 * database decides between two people pressing at once (a partial unique index over open takes),
 * and the second hears who holds it. A take ends when its holder (or a coordinator) releases it,
 * or when its holder uploads a spectrum ("done").
 */
import { and, desc, eq } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId, type SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { actorOf, record, type Actor } from '../platform/realtime';
import { CandidateError, candidateForWork, uniqueViolation } from './candidates';
import { assertEventOpen } from '../alerts/events';

export const takeInput = z.object({ note: z.string().trim().max(500, 'the note must be at most 500 characters').optional() });

export interface SpectrumTakeView {
	id: string;
	userId: string;
	userName: string;
	state: table.SpectrumTakeState;
	note: string;
	takenAt: string;
	endedAt: string | null;
}

/** The candidate is held by someone else; names them so the loser knows whom to talk to. */
export class CandidateTaken extends CandidateError {
	constructor(readonly holder: SpectrumTakeView) {
		super(409, 'taken', `${holder.userName} is already getting a spectrum of this candidate (since ${holder.takenAt}${holder.note ? `: ${holder.note}` : ''}).`);
	}
}

function takes(where: ReturnType<typeof and>): SpectrumTakeView[] {
	return db
		.select({ t: table.spectrumTake, userName: table.user.name })
		.from(table.spectrumTake)
		.innerJoin(table.user, eq(table.user.id, table.spectrumTake.userId))
		.where(where)
		.orderBy(desc(table.spectrumTake.takenAt))
		.all()
		.map(({ t, userName }) => ({
			id: t.id,
			userId: t.userId,
			userName,
			state: t.state,
			note: t.note,
			takenAt: t.takenAt.toISOString(),
			endedAt: t.endedAt?.toISOString() ?? null
		}));
}

/** The open take of a candidate, or null. */
export function currentTake(candidateId: string): SpectrumTakeView | null {
	return takes(and(eq(table.spectrumTake.candidateId, candidateId), eq(table.spectrumTake.state, 'taken')))[0] ?? null;
}

/** Every take of a candidate, newest first. */
export function listTakes(candidateId: string): SpectrumTakeView[] {
	return takes(and(eq(table.spectrumTake.candidateId, candidateId)));
}

/**
 * Take a candidate for a spectrum. Refusals as CandidateError: 403 without the permission, 404,
 * 409 retracted event, 409 `rejected` for a candidate set aside (reopen it first), CandidateTaken
 * (409 `taken`) naming the holder — also when the holder is the same person.
 */
export function takeCandidate(user: SessionUser, candidateId: string, raw: unknown = {}, now = new Date()): SpectrumTakeView {
	if (!can({ user }, 'candidates.spectroscopy')) throw new CandidateError(403, 'forbidden', 'Your role does not allow taking candidates for spectroscopy.');
	const { candidate, event } = candidateForWork(candidateId, 'spectra are not planned');
	assertEventOpen(event, 'its candidates are not taken for spectra');
	const parsed = takeInput.safeParse(raw ?? {});
	if (!parsed.success) throw new CandidateError(422, 'invalid', parsed.error.issues[0].message, { note: parsed.error.issues[0].message });
	if (candidate.state === 'rejected') throw new CandidateError(409, 'rejected', `${candidate.name} was set aside; reopen it before planning a spectrum.`);
	let id: string;
	try {
		id = db
			.insert(table.spectrumTake)
			.values({ id: randomId(), candidateId: candidate.id, userId: user.id, state: 'taken', note: parsed.data.note ?? '', takenAt: now })
			.returning({ id: table.spectrumTake.id })
			.get().id;
	} catch (e) {
		if (!uniqueViolation(e)) throw e;
		const holder = currentTake(candidate.id);
		if (!holder) throw new CandidateError(409, 'taken', 'Someone took this candidate a moment ago and has already let it go; try again.');
		throw new CandidateTaken(holder);
	}
	const take = takes(eq(table.spectrumTake.id, id))[0];
	record(actorOf(user), 'candidate.taken', `event:${event.id}`, { candidateId: candidate.id, eventId: event.id, name: candidate.name, takeId: id, userId: user.id, note: take.note });
	return take;
}

/** End the open take: its holder or a coordinator may release it. 404 when nobody holds it, 403 for someone else's. */
export function releaseCandidate(user: SessionUser, candidateId: string, now = new Date()): SpectrumTakeView {
	if (!can({ user }, 'candidates.spectroscopy')) throw new CandidateError(403, 'forbidden', 'Your role does not allow releasing candidates.');
	const { candidate, event } = candidateForWork(candidateId, 'spectra are not planned');
	const open = currentTake(candidate.id);
	if (!open) throw new CandidateError(404, 'not_taken', `Nobody is getting a spectrum of ${candidate.name} at the moment.`);
	if (open.userId !== user.id && !user.roles.includes('coordinator')) throw new CandidateError(403, 'forbidden', `${open.userName} holds ${candidate.name}; only they or a coordinator may release it.`);
	const changed = db
		.update(table.spectrumTake)
		.set({ state: 'released', endedAt: now })
		.where(and(eq(table.spectrumTake.id, open.id), eq(table.spectrumTake.state, 'taken')))
		.run().changes;
	if (changed !== 1) throw new CandidateError(409, 'bad_state', 'The take changed meanwhile; reload and try again.');
	record(actorOf(user), 'candidate.released', `event:${event.id}`, { candidateId: candidate.id, eventId: event.id, name: candidate.name, takeId: open.id, userId: open.userId });
	return takes(eq(table.spectrumTake.id, open.id))[0];
}

/** The uploader's own open take of the candidate ends as done (called after a spectrum is stored). Returns the take id or null. */
export function completeTake(userId: string, candidateId: string, now = new Date()): string | null {
	const row = db
		.update(table.spectrumTake)
		.set({ state: 'done', endedAt: now })
		.where(and(eq(table.spectrumTake.candidateId, candidateId), eq(table.spectrumTake.userId, userId), eq(table.spectrumTake.state, 'taken')))
		.returning({ id: table.spectrumTake.id })
		.get();
	return row?.id ?? null;
}

/**
 * End every open take of an event's candidates (the event was closed), each logged as
 * `candidate.released` by `actor`. Returns the takes ended.
 */
export function releaseOpenTakes(eventId: string, actor: Actor, now = new Date()): { takeId: string; candidateId: string; userId: string }[] {
	const open = db
		.select({ takeId: table.spectrumTake.id, candidateId: table.candidate.id, name: table.candidate.name, userId: table.spectrumTake.userId })
		.from(table.spectrumTake)
		.innerJoin(table.candidate, eq(table.candidate.id, table.spectrumTake.candidateId))
		.where(and(eq(table.candidate.eventId, eventId), eq(table.spectrumTake.state, 'taken')))
		.all();
	const ended: { takeId: string; candidateId: string; userId: string }[] = [];
	for (const t of open) {
		const changed = db
			.update(table.spectrumTake)
			.set({ state: 'released', endedAt: now })
			.where(and(eq(table.spectrumTake.id, t.takeId), eq(table.spectrumTake.state, 'taken')))
			.run().changes;
		if (changed !== 1) continue;
		record(actor, 'candidate.released', `event:${eventId}`, { candidateId: t.candidateId, eventId, name: t.name, takeId: t.takeId, userId: t.userId });
		ended.push({ takeId: t.takeId, candidateId: t.candidateId, userId: t.userId });
	}
	return ended;
}
