/**
 * Classifications: what a spectroscopist says a candidate is, with a confidence word, a redshift
 * when measured, and the spectrum it rests on. Several people may disagree; each author's latest
 * opinion counts and the summary says whether they agree (lib/candidates/labels.ts). The
 * candidate's `classification` column holds the agreed label or 'disputed'. Every classification
 * is e-mailed to the duty scientist(s) on shift and the coordinators.
 */
import { and, asc, eq } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId, type SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { actorOf, record } from '../platform/realtime';
import {
	CLASSIFICATION_LABELS,
	CONFIDENCE_LEVELS,
	DISPUTED,
	LABEL_NAMES,
	summariseClassifications,
	type ClassificationLabel,
	type ClassificationSummary,
	type Confidence
} from '../../candidates/labels.ts';
import { CandidateError, candidateForWork, fieldErrorsOf, joinFields } from './candidates';
import { candidateLink, candidateRecipients, mailRecipients } from './notify';
import { eventClassOf } from '../people/notifications';

export const classificationInput = z.object({
	label: z.enum(CLASSIFICATION_LABELS, { error: `label must be one of ${CLASSIFICATION_LABELS.join(', ')}` }),
	confidence: z.enum(CONFIDENCE_LEVELS, { error: 'confidence must be low, medium or high' }),
	redshift: z
		.number({ error: 'redshift must be a number' })
		.min(-0.01, 'redshift must be between −0.01 and 10')
		.max(10, 'redshift must be between −0.01 and 10')
		.nullable()
		.optional(),
	notes: z.string().trim().max(4000, 'notes must be at most 4000 characters').optional(),
	spectrumId: z.string().min(1).max(80).nullable().optional()
});
export type ClassificationInput = z.input<typeof classificationInput>;

export interface ClassificationView {
	id: string;
	label: ClassificationLabel;
	labelName: string;
	confidence: Confidence;
	redshift: number | null;
	notes: string;
	spectrumId: string | null;
	authorId: string | null;
	authorName: string;
	createdAt: string;
}

/** A candidate's classifications, oldest first. */
export function listClassifications(candidateId: string): ClassificationView[] {
	return db
		.select({ c: table.candidateClassification, authorName: table.user.name })
		.from(table.candidateClassification)
		.leftJoin(table.user, eq(table.user.id, table.candidateClassification.authorUserId))
		.where(eq(table.candidateClassification.candidateId, candidateId))
		.orderBy(asc(table.candidateClassification.createdAt), asc(table.candidateClassification.id))
		.all()
		.map(({ c, authorName }) => ({
			id: c.id,
			label: c.label,
			labelName: LABEL_NAMES[c.label],
			confidence: c.confidence,
			redshift: c.redshift,
			notes: c.notes,
			spectrumId: c.spectrumId,
			authorId: c.authorUserId,
			authorName: authorName ?? 'a former member',
			createdAt: c.createdAt.toISOString()
		}));
}

/** What the classifications of a candidate say together ("2 classifications disagree: …"). */
export function classificationSummary(candidateId: string): ClassificationSummary {
	return summariseClassifications(
		listClassifications(candidateId).map((c) => ({ label: c.label, confidence: c.confidence, authorId: c.authorId ?? `gone:${c.id}`, authorName: c.authorName, createdAt: c.createdAt }))
	);
}

export interface Classified {
	classification: ClassificationView;
	summary: ClassificationSummary;
}

let pendingMail: Promise<unknown> = Promise.resolve();

/** Resolves when the classification e-mails asked for so far were handed to the mail server (tests). */
export async function classificationMailIdle(): Promise<void> {
	let seen: Promise<unknown>;
	do {
		seen = pendingMail;
		await seen;
	} while (seen !== pendingMail);
}

/**
 * Record a classification. Refusals as CandidateError: 403 without the permission, 404 (candidate,
 * or a spectrumId that is not this candidate's), 409 retracted event, 422 bad fields, each named.
 * Logs `candidate.classified` to the board and the event's room and e-mails the duty scientist(s)
 * and coordinators (asynchronously; `classificationMailIdle()` waits for it).
 */
export function classifyCandidate(user: SessionUser, candidateId: string, raw: unknown, now = new Date()): Classified {
	if (!can({ user }, 'candidates.classify')) throw new CandidateError(403, 'forbidden', 'Your role does not allow classifying candidates.');
	const { candidate, event } = candidateForWork(candidateId, 'classifications are not taken');
	const parsed = classificationInput.safeParse(raw ?? {});
	if (!parsed.success) {
		const fields = fieldErrorsOf(parsed.error);
		throw new CandidateError(422, 'invalid', joinFields(fields), fields);
	}
	const input = parsed.data;
	if (input.spectrumId) {
		const ok = db
			.select({ id: table.candidateSpectrum.id })
			.from(table.candidateSpectrum)
			.where(and(eq(table.candidateSpectrum.id, input.spectrumId), eq(table.candidateSpectrum.candidateId, candidate.id)))
			.get();
		if (!ok) throw new CandidateError(404, 'not_found', `No spectrum ${input.spectrumId} of ${candidate.name}.`, { spectrumId: 'not a spectrum of this candidate' });
	}
	const id = randomId();
	const summary = db.transaction((tx) => {
		tx.insert(table.candidateClassification)
			.values({
				id,
				candidateId: candidate.id,
				label: input.label,
				confidence: input.confidence,
				redshift: input.redshift ?? null,
				notes: input.notes ?? '',
				spectrumId: input.spectrumId ?? null,
				authorUserId: user.id,
				createdAt: now
			})
			.run();
		const s = classificationSummary(candidate.id);
		tx.update(table.candidate)
			.set({ classification: s.status === 'agreed' ? s.label : s.status === 'disputed' ? DISPUTED : null })
			.where(eq(table.candidate.id, candidate.id))
			.run();
		return s;
	});
	const view = listClassifications(candidate.id).find((c) => c.id === id)!;
	const payload = {
		candidateId: candidate.id,
		eventId: event.id,
		name: candidate.name,
		classificationId: id,
		label: view.label,
		confidence: view.confidence,
		redshift: view.redshift,
		summary: summary.text,
		status: summary.status
	};
	record(actorOf(user), 'candidate.classified', 'board', payload);
	record(actorOf(user), 'candidate.classified', `event:${event.id}`, payload);

	const zText = view.redshift === null ? '' : `, z = ${view.redshift}`;
	const subject = `Classified: ${candidate.name} in ${event.sourceEventId} as ${view.labelName} (${view.confidence}${zText})${summary.status === 'disputed' ? ' · classifications disagree' : ''}`;
	pendingMail = pendingMail.then(() =>
		mailRecipients(
			candidateRecipients(now),
			(r) => ({
				subject,
				text: [
					`${r.name},`,
					'',
					`${user.name} classified candidate ${candidate.name} of ${event.sourceEventId} as ${view.labelName}, confidence ${view.confidence}${zText}.`,
					view.notes ? `Notes: ${view.notes}` : null,
					'',
					summary.text,
					'',
					`Candidate page: ${candidateLink(event.id, candidate.name)}`
				]
					.filter((l): l is string => l !== null)
					.join('\n')
			}),
			{ eventId: event.id, candidateId: candidate.id },
			'candidate.classified',
			eventClassOf(event.classification)
		).catch((e) => console.error(`classification mail for ${candidate.id} failed`, e))
	);
	return { classification: view, summary };
}
