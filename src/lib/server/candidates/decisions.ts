/**
 * Where a candidate stands, set by a person with a reason: rejected (a moving object, a known
 * variable, an artefact, unrelated to the merger), promoted for spectroscopy, or reopened. Each
 * decision is kept (the candidate's history); the candidate row holds the latest state.
 */
import { asc, eq } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId, type SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { actorOf, record } from '../platform/realtime';
import { REJECTION_NAMES, REJECTION_REASONS, type CandidateState, type RejectionReason } from '../../candidates/labels.ts';
import { CandidateError, candidateForWork, fieldErrorsOf, joinFields } from './candidates';

const note = z.string().trim().max(2000, 'the note must be at most 2000 characters');

export const decisionInput = z.discriminatedUnion(
	'state',
	[
		z.object({ state: z.literal('rejected'), reason: z.enum(REJECTION_REASONS, { error: `reason must be one of ${REJECTION_REASONS.join(', ')}` }), note: note.optional() }),
		z.object({ state: z.literal('promoted'), note: note.optional() }),
		z.object({
			state: z.literal('open'),
			note: z.string({ error: 'say why the candidate is reopened' }).trim().min(1, 'say why the candidate is reopened').max(2000, 'the note must be at most 2000 characters')
		})
	],
	{ error: 'state must be rejected, promoted or open' }
);
export type DecisionInput = z.input<typeof decisionInput>;

export interface DecisionView {
	id: string;
	state: CandidateState;
	reason: RejectionReason | null;
	/** The reason in words, e.g. "rejected as a moving object (asteroid)". */
	summary: string;
	note: string;
	userName: string;
	createdAt: string;
}

function summaryOf(state: CandidateState, reason: RejectionReason | null): string {
	if (state === 'rejected') return `rejected as ${reason ? REJECTION_NAMES[reason] : 'unsuitable'}`;
	return state === 'promoted' ? 'promoted for spectroscopy' : 'reopened';
}

/** A candidate's decisions, oldest first. */
export function listDecisions(candidateId: string): DecisionView[] {
	return db
		.select({ d: table.candidateDecision, userName: table.user.name })
		.from(table.candidateDecision)
		.leftJoin(table.user, eq(table.user.id, table.candidateDecision.userId))
		.where(eq(table.candidateDecision.candidateId, candidateId))
		.orderBy(asc(table.candidateDecision.createdAt), asc(table.candidateDecision.id))
		.all()
		.map(({ d, userName }) => ({
			id: d.id,
			state: d.state,
			reason: d.reason,
			summary: summaryOf(d.state, d.reason),
			note: d.note,
			userName: userName ?? 'a former member',
			createdAt: d.createdAt.toISOString()
		}));
}

/**
 * Set a candidate's state. Refusals as CandidateError: 403 without the permission, 404, 409
 * retracted event, 409 `same_state` when it already stands there (a rejection with another reason
 * is a new decision), 422 bad fields. Logs `candidate.decided` to the event's room (and the board for a promotion).
 */
export function decideCandidate(user: SessionUser, candidateId: string, raw: unknown, now = new Date()): DecisionView {
	if (!can({ user }, 'candidates.decide')) throw new CandidateError(403, 'forbidden', 'Your role does not allow setting a candidate’s state.');
	const { candidate, event } = candidateForWork(candidateId, 'changes are not taken');
	const parsed = decisionInput.safeParse(raw ?? {});
	if (!parsed.success) {
		const fields = fieldErrorsOf(parsed.error);
		throw new CandidateError(422, 'invalid', joinFields(fields), fields);
	}
	const input = parsed.data;
	const reason = input.state === 'rejected' ? input.reason : null;
	const last = listDecisions(candidate.id).at(-1);
	if (candidate.state === input.state && (input.state !== 'rejected' || last?.reason === reason))
		throw new CandidateError(409, 'same_state', `${candidate.name} is already ${summaryOf(input.state, reason)}.`);
	const id = randomId();
	const changed = db.transaction((tx) => {
		const n = tx
			.update(table.candidate)
			.set({ state: input.state })
			.where(eq(table.candidate.id, candidate.id))
			.run().changes;
		tx.insert(table.candidateDecision)
			.values({ id, candidateId: candidate.id, state: input.state, reason, note: input.note ?? '', userId: user.id, createdAt: now })
			.run();
		return n;
	});
	if (changed !== 1) throw new CandidateError(404, 'not_found', `No candidate ${candidateId}.`);
	const view = listDecisions(candidate.id).find((d) => d.id === id)!;
	const payload = { candidateId: candidate.id, eventId: event.id, name: candidate.name, state: input.state, from: candidate.state, reason, summary: view.summary };
	record(actorOf(user), 'candidate.decided', `event:${event.id}`, payload);
	if (input.state === 'promoted') record(actorOf(user), 'candidate.decided', 'board', payload);
	return view;
}
