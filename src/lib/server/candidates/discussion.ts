/** The discussion thread of a candidate: short notes from the people working on it, oldest first. */
import { asc, eq } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId, type SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { actorOf, record } from '../platform/realtime';
import { CandidateError, candidateForWork } from './candidates';

export const COMMENT_MAX_CHARS = 4000;

export const commentInput = z.object({
	body: z.string({ error: 'write something' }).trim().min(1, 'write something').max(COMMENT_MAX_CHARS, `a comment may be at most ${COMMENT_MAX_CHARS} characters`)
});

export interface CommentView {
	id: string;
	body: string;
	userId: string | null;
	userName: string;
	createdAt: string;
}

export function listComments(candidateId: string): CommentView[] {
	return db
		.select({ c: table.candidateComment, userName: table.user.name })
		.from(table.candidateComment)
		.leftJoin(table.user, eq(table.user.id, table.candidateComment.userId))
		.where(eq(table.candidateComment.candidateId, candidateId))
		.orderBy(asc(table.candidateComment.createdAt), asc(table.candidateComment.id))
		.all()
		.map(({ c, userName }) => ({ id: c.id, body: c.body, userId: c.userId, userName: userName ?? 'a former member', createdAt: c.createdAt.toISOString() }));
}

/** Add a comment. Refusals as CandidateError: 403, 404, 409 retracted event, 422 empty or too long. Logs `candidate.comment`. */
export function addComment(user: SessionUser, candidateId: string, raw: unknown, now = new Date()): CommentView {
	if (!can({ user }, 'candidates.discuss')) throw new CandidateError(403, 'forbidden', 'Your role does not allow joining the discussion.');
	const { candidate, event } = candidateForWork(candidateId, 'comments are not taken');
	const parsed = commentInput.safeParse(raw ?? {});
	if (!parsed.success) throw new CandidateError(422, 'invalid', `body: ${parsed.error.issues[0].message}`, { body: parsed.error.issues[0].message });
	const id = randomId();
	db.insert(table.candidateComment).values({ id, candidateId: candidate.id, userId: user.id, body: parsed.data.body, createdAt: now }).run();
	record(actorOf(user), 'candidate.comment', `event:${event.id}`, { candidateId: candidate.id, eventId: event.id, name: candidate.name, commentId: id });
	return { id, body: parsed.data.body, userId: user.id, userName: user.name, createdAt: now.toISOString() };
}
