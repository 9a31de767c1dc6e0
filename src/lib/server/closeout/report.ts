/**
 * The event report: gathers the stored rows of every earlier stage (event and notices, duty pages,
 * the current sky map and its ranking, reported pointings, candidates and their work, who did
 * what) and hands them to the pure `buildReport` (src/lib/closeout/report.ts). Nothing is kept:
 * the report is made again from the rows on every request, so it always agrees with them.
 *
 * Also the coordinator's note on the record, stored per event and shown in every rendering.
 */
import { and, eq, inArray, isNotNull, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { InputError, DomainError } from '../platform/errors';
import type { SessionUser } from '../people/auth';
import { getEvent, skymapDisplay } from '../alerts/events';
import { loadSkyMap } from '../alerts/skymap-cache';
import { runWork } from '../platform/work-pool';
import { listCandidates } from '../candidates/candidates';
import { getCandidateDetailById } from '../candidates/detail';
import { type EventReport, type ReportCandidate, type ReportDeedInput, type ReportAnnotation } from '../../closeout/report.ts';
import { footprintOf } from '../../targeting/telescope.ts';
import { pointingsWithOptics } from '../coordination/observations';
import { reportMarkdown } from '../../closeout/markdown.ts';
import type { FootprintShape } from '../../targeting/sky-geometry.ts';
import { RECORD_NOTE_MAX_CHARS } from '../../limits.ts';

export type { EventReport } from '../../closeout/report.ts';

export class EventNotFound extends DomainError {
	constructor(eventId: string) {
		super(404, 'not_found', `No event ${eventId}.`);
	}
}

/** File names of the downloads and attachments: the source id, made safe for a file name. */
export function reportFileName(sourceEventId: string, ext: 'md' | 'pdf'): string {
	return `${sourceEventId.replace(/[^A-Za-z0-9._-]+/g, '_')}-record.${ext}`;
}

/** The report as a Markdown file: its name and text. */
export async function recordMarkdown(eventId: string, now = new Date()): Promise<{ fileName: string; text: string }> {
	const report = await eventReport(eventId, now);
	return { fileName: reportFileName(report.event.sourceEventId, 'md'), text: reportMarkdown(report) };
}

/**
 * The report of one event, made now from its rows; throws EventNotFound for an unknown id. The
 * map is read and the report (its coverage figures) computed on the work pool.
 */
export async function eventReport(eventId: string, now = new Date()): Promise<EventReport> {
	const event = getEvent(eventId);
	if (!event) throw new EventNotFound(eventId);

	const ack = db
		.select({ at: sql<number | null>`min(${table.dutyPage.acknowledgedAt})` })
		.from(table.dutyPage)
		.where(eq(table.dutyPage.eventId, eventId))
		.get()?.at;

	const map = event.skymap ? await loadSkyMap(event.skymap.skymapId) : null;

	const observations = pointingsWithOptics(eventId);

	// The ranking of the current map only (a ranking left from an earlier map is not this map's).
	const skymapId = event.skymap?.skymapId ?? null;
	const galaxies = skymapId
		? db
				.select({ id: table.eventGalaxy.galaxyId, raDeg: table.galaxy.raDeg, decDeg: table.galaxy.decDeg, probability: table.eventGalaxy.probability })
				.from(table.eventGalaxy)
				.innerJoin(table.galaxy, eq(table.galaxy.id, table.eventGalaxy.galaxyId))
				.where(and(eq(table.eventGalaxy.eventId, eventId), eq(table.eventGalaxy.skymapId, skymapId)))
				.all()
				.map((g) => ({ ...g, id: String(g.id) }))
		: [];
	const meta = db.select({ candidates: table.eventTargetsMeta.candidates }).from(table.eventTargetsMeta).where(eq(table.eventTargetsMeta.eventId, eventId)).get();

	const candidates = listCandidates(eventId)
		.map((c) => getCandidateDetailById(c.id, now))
		.filter((d) => d !== null)
		.map((d): ReportCandidate => {
			const v = d.vetting;
			const filters = v ? Object.entries(v.lightCurve.filters) : [];
			return {
				name: d.candidate.name,
				raDeg: d.candidate.raDeg,
				decDeg: d.candidate.decDeg,
				discoveredAt: d.candidate.discoveredAt,
				discoveryMag: d.candidate.magnitude,
				discoveryFilter: d.candidate.filter,
				team: d.candidate.teamName,
				reportedBy: d.candidate.reportedBy,
				state: d.candidate.state,
				vetting: {
					verdict: v?.rules.verdict ?? null,
					credibleLevel: v?.sky?.credibleLevel ?? null,
					host: v?.hosts.host?.galaxy.name ?? null,
					hostDistancePValue: v?.hosts.host?.distancePValue ?? null,
					absoluteMag: v?.absoluteMagnitude?.value ?? null,
					reasons: v?.rules.reasons ?? []
				},
				photometry: {
					detections: d.photometry.filter((p) => p.mag !== null).length,
					upperLimits: d.photometry.filter((p) => p.mag === null).length,
					filters: filters.map(([filter, f]) => ({ filter, detections: f.detections, upperLimits: f.upperLimits, rateMagPerDay: f.rateMagPerDay, rateErr: f.rateErr }))
				},
				classification: {
					status: d.classificationSummary.status,
					label: d.classificationSummary.label,
					text: d.classificationSummary.text,
					opinions: d.classifications.map((c) => ({ label: c.labelName, confidence: c.confidence, author: c.authorName, redshift: c.redshift, at: c.createdAt }))
				}
			};
		});
	const candidateIds = candidates.length ? listCandidates(eventId).map((c) => c.id) : [];
	const classifications = candidateIds.length
		? (db.select({ n: sql<number>`count(*)` }).from(table.candidateClassification).where(inArray(table.candidateClassification.candidateId, candidateIds)).get()?.n ?? 0)
		: 0;

	return runWork('buildReport', {
		event: {
			eventId: event.eventId,
			sourceEventId: event.sourceEventId,
			state: event.state,
			role: event.role,
			mergerTime: event.eventTime,
			farPerYear: event.farPerYear,
			classification: event.classification as Record<string, number | null> | null,
			skymapId,
			area50Deg2: event.skymap?.area50 ?? null,
			area90Deg2: event.skymap?.area90 ?? null,
			distanceMeanMpc: event.skymap?.distanceMean ?? null,
			distanceStdMpc: event.skymap?.distanceStd ?? null,
			closedAt: event.closedAt
		},
		notices: event.notices.map((n) => ({ kind: n.kind, role: n.role, authoredAt: n.authoredAt, receivedAt: n.receivedAt })),
		acknowledgedAt: ack ? new Date(ack).toISOString() : null,
		map,
		observations: observations.map((r) => ({
			id: r.o.id,
			observedAt: r.o.observedAt.toISOString(),
			raDeg: r.o.raDeg,
			decDeg: r.o.decDeg,
			footprint: footprintOf(r),
			filter: r.o.filter,
			exposureS: r.o.exposureS,
			limitingMag: r.o.limitingMag,
			teamId: r.o.teamId,
			teamName: r.teamName,
			telescopeId: r.o.telescopeId,
			telescopeName: r.telescopeName
		})),
		galaxies,
		galaxiesRanked: meta?.candidates ?? galaxies.length,
		candidates,
		classifications,
		deeds: deeds(eventId, candidateIds, observations.map((r) => ({ person: r.reporter, team: r.teamName }))),
		annotation: recordNote(eventId),
		generatedAt: now.toISOString()
	});
}

/** Who did something for the event, from the rows that say so. */
function deeds(eventId: string, candidateIds: string[], observed: { person: string | null; team: string }[]): ReportDeedInput[] {
	const out: ReportDeedInput[] = observed.map((o) => ({ ...o, deed: 'observed' }));
	const named = <T extends { person: string | null }>(rows: T[]) => rows.filter((r) => r.person !== null);
	for (const r of named(
		db
			.select({ person: table.user.name })
			.from(table.dutyPage)
			.innerJoin(table.user, eq(table.user.id, table.dutyPage.acknowledgedBy))
			.where(and(eq(table.dutyPage.eventId, eventId), isNotNull(table.dutyPage.acknowledgedAt)))
			.all()
	))
		out.push({ person: r.person, team: null, deed: 'acknowledged' });
	for (const r of db
		.select({ person: table.user.name, team: table.team.name })
		.from(table.claim)
		.innerJoin(table.team, eq(table.team.id, table.claim.teamId))
		.leftJoin(table.user, eq(table.user.id, table.claim.userId))
		.where(eq(table.claim.eventId, eventId))
		.all())
		out.push({ person: r.person, team: r.team, deed: 'claimed' });
	for (const r of db
		.select({ person: table.user.name, team: table.team.name })
		.from(table.candidate)
		.innerJoin(table.team, eq(table.team.id, table.candidate.teamId))
		.leftJoin(table.user, eq(table.user.id, table.candidate.reportedByUserId))
		.where(eq(table.candidate.eventId, eventId))
		.all())
		out.push({ person: r.person, team: r.team, deed: 'reported a candidate' });
	if (candidateIds.length) {
		const by = (userCol: Parameters<typeof eq>[0], candidateCol: Parameters<typeof inArray>[0], tbl: typeof table.candidatePhotometry | typeof table.candidateSpectrum | typeof table.candidateClassification | typeof table.candidateDecision) =>
			db
				.selectDistinct({ person: table.user.name })
				.from(tbl)
				.innerJoin(table.user, eq(table.user.id, userCol))
				.where(inArray(candidateCol, candidateIds))
				.all();
		for (const r of by(table.candidatePhotometry.reportedByUserId, table.candidatePhotometry.candidateId, table.candidatePhotometry)) out.push({ person: r.person, team: null, deed: 'photometry' });
		for (const r of by(table.candidateSpectrum.uploadedByUserId, table.candidateSpectrum.candidateId, table.candidateSpectrum)) out.push({ person: r.person, team: null, deed: 'spectrum' });
		for (const r of by(table.candidateClassification.authorUserId, table.candidateClassification.candidateId, table.candidateClassification)) out.push({ person: r.person, team: null, deed: 'classified' });
		for (const r of by(table.candidateDecision.userId, table.candidateDecision.candidateId, table.candidateDecision)) out.push({ person: r.person, team: null, deed: 'decided' });
	}
	// Closing and reopening are logged by the close-out stage; read from the log so this stays independent of its tables.
	for (const r of db
		.select({ action: table.eventLog.action, person: table.eventLog.actorLabel, userId: table.eventLog.actorUserId })
		.from(table.eventLog)
		.where(and(eq(table.eventLog.room, `event:${eventId}`), inArray(table.eventLog.action, ['event.closed', 'event.reopened'])))
		.all())
		if (r.userId) out.push({ person: r.person, team: null, deed: r.action === 'event.closed' ? 'closed' : 'reopened' });
	return out;
}

// ───────────── the coordinator's note ─────────────

/** The note on an event's record, or null. */
export function recordNote(eventId: string): ReportAnnotation | null {
	const row = db
		.select({ text: table.eventRecordNote.text, updatedAt: table.eventRecordNote.updatedAt, by: table.user.name })
		.from(table.eventRecordNote)
		.leftJoin(table.user, eq(table.user.id, table.eventRecordNote.updatedBy))
		.where(eq(table.eventRecordNote.eventId, eventId))
		.get();
	return row ? { text: row.text, updatedBy: row.by, updatedAt: row.updatedAt.toISOString() } : null;
}

/** Save (or, with blank text, remove) the note on an event's record. */
export function saveRecordNote(user: Pick<SessionUser, 'id'>, eventId: string, text: string, now = new Date()): ReportAnnotation | null {
	if (!getEvent(eventId)) throw new EventNotFound(eventId);
	const trimmed = text.replace(/\r\n/g, '\n').trim();
	if (trimmed.length > RECORD_NOTE_MAX_CHARS) throw new InputError(`The note is ${trimmed.length} characters long; keep it under ${RECORD_NOTE_MAX_CHARS}.`, 'note');
	if (!trimmed) {
		db.delete(table.eventRecordNote).where(eq(table.eventRecordNote.eventId, eventId)).run();
		return null;
	}
	db.insert(table.eventRecordNote)
		.values({ eventId, text: trimmed, updatedBy: user.id, updatedAt: now })
		.onConflictDoUpdate({ target: table.eventRecordNote.eventId, set: { text: trimmed, updatedBy: user.id, updatedAt: now } })
		.run();
	return recordNote(eventId);
}

/** What the PDF's sky drawing shows: the current map's credible contours, the footprints and the candidates. */
export interface RecordSky {
	contours: { level: number; lines: [number, number][][] }[];
	footprints: ({ raDeg: number; decDeg: number; team: string } & FootprintShape)[];
	candidates: { name: string; raDeg: number; decDeg: number }[];
}

export function recordSky(eventId: string): RecordSky {
	const skymapId = db.select({ id: table.gwEvent.latestSkymapId }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get()?.id ?? null;
	const display = skymapId ? skymapDisplay(skymapId) : null;
	const contours = Array.isArray(display?.contours) ? (display.contours as RecordSky['contours']) : [];
	const footprints = pointingsWithOptics(eventId).map((r) => ({ raDeg: r.o.raDeg, decDeg: r.o.decDeg, team: r.teamName, ...footprintOf(r) }));
	const candidates = db
		.select({ name: table.candidate.name, raDeg: table.candidate.raDeg, decDeg: table.candidate.decDeg })
		.from(table.candidate)
		.where(eq(table.candidate.eventId, eventId))
		.all();
	return { contours, footprints, candidates };
}
