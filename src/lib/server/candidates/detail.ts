/**
 * Everything about one candidate, for its page and the API: position, discovery and reporter
 * (the candidate row), where it stands, its vetting (recomputed first if an input changed),
 * photometry, spectra, who is getting a spectrum, classifications with their summary, the
 * discussion and the history (its entries in the event log).
 */
import { and, asc, eq, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import type { CandidateVetting } from '../../candidates/vetting.ts';
import type { ClassificationSummary } from '../../candidates/labels.ts';
import { candidateIdByName, candidateRow, type CandidateRow } from './candidates';
import { vettingOf } from './vetting';
import { listPhotometry, type PhotometryRow } from './photometry';
import { listSpectra, type SpectrumView } from './spectra';
import { currentTake, listTakes, type SpectrumTakeView } from './takers';
import { classificationSummary, listClassifications, type ClassificationView } from './classifications';
import { listDecisions, type DecisionView } from './decisions';
import { listComments, type CommentView } from './discussion';
import { closureOf } from '../alerts/events';
import type { ClosureView } from '../../event-view.ts';

export interface CandidateHistoryEntry {
	seq: number;
	action: string;
	actor: string;
	at: string;
	payload: Record<string, unknown>;
}

export interface CandidateDetail {
	candidate: CandidateRow;
	/** `closure`: who closed the event, when and why (null while open). */
	event: { id: string; sourceEventId: string; state: table.GwEvent['state']; eventTime: string | null; closure: ClosureView | null };
	/** Hours from the merger to now; null without a merger time. */
	hoursSinceMerger: number | null;
	/** The latest decision (why it stands where it does); null while it was never decided. */
	decision: DecisionView | null;
	decisions: DecisionView[];
	vetting: CandidateVetting | null;
	photometry: PhotometryRow[];
	spectra: SpectrumView[];
	/** Who is getting a spectrum now, and every take so far (newest first). */
	take: SpectrumTakeView | null;
	takes: SpectrumTakeView[];
	classifications: ClassificationView[];
	classificationSummary: ClassificationSummary;
	discussion: CommentView[];
	/** Event-log entries about this candidate, oldest first. */
	history: CandidateHistoryEntry[];
}

function history(eventId: string, candidateId: string): CandidateHistoryEntry[] {
	return db
		.select()
		.from(table.eventLog)
		.where(and(eq(table.eventLog.room, `event:${eventId}`), sql`json_extract(${table.eventLog.payload}, '$.candidateId') = ${candidateId}`))
		.orderBy(asc(table.eventLog.seq))
		.all()
		.map((r) => ({ seq: r.seq, action: r.action, actor: r.actorLabel, at: r.createdAt.toISOString(), payload: r.payload }));
}

/** One candidate by id, everything about it; null for an unknown id. */
export function getCandidateDetailById(candidateId: string, now = new Date()): CandidateDetail | null {
	const candidate = candidateRow(candidateId);
	if (!candidate) return null;
	const row = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, candidate.eventId)).get()!;
	const event = { id: row.id, sourceEventId: row.sourceEventId, state: row.state, eventTime: row.eventTime, closure: closureOf(row) };
	const decisions = listDecisions(candidateId);
	return {
		candidate,
		event: { ...event, eventTime: event.eventTime?.toISOString() ?? null },
		hoursSinceMerger: event.eventTime ? (now.getTime() - event.eventTime.getTime()) / 3_600_000 : null,
		decision: decisions.at(-1) ?? null,
		decisions,
		vetting: vettingOf(candidateId),
		photometry: listPhotometry(candidateId),
		spectra: listSpectra(candidateId),
		take: currentTake(candidateId),
		takes: listTakes(candidateId),
		classifications: listClassifications(candidateId),
		classificationSummary: classificationSummary(candidateId),
		discussion: listComments(candidateId),
		history: history(candidate.eventId, candidateId)
	};
}

/** One candidate of an event by its name (case-insensitive), everything about it; null when the event has no such candidate. */
export function getCandidateDetail(eventId: string, name: string, now = new Date()): CandidateDetail | null {
	const id = candidateIdByName(eventId, name);
	return id ? getCandidateDetailById(id, now) : null;
}
