/**
 * A candidate's photometry: detections and upper limits reported as JSON rows or a CSV file
 * (header `time,filter,mag,mag_err,limit`, the pure reader in lib/candidates/photometry.ts), by a
 * person or a telescope's token. All rows or none: any bad row refuses the whole batch, every
 * problem named by its CSV line or JSON row. After storing, the candidate's vetting is recomputed.
 */
import { and, asc, eq, inArray } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId } from '../people/auth';
import { can } from '../people/permissions';
import { record } from '../platform/realtime';
import { checkPhotometryRow, MAX_PHOTOMETRY_ROWS, type PhotometryLineError, type PhotometryPoint } from '../../candidates/photometry.ts';
import { assertEventOpen } from '../alerts/events';
import { actorOfReporter, CandidateError, candidateForWork, fieldErrorsOf, joinFields, uniqueViolation, type CandidateReporter } from './candidates';
import { vetEvent, type VetOutcome } from './vetting';
import { runWork } from '../platform/work-pool';

const MIN = 60_000;

/** A problem with one JSON row (1-based). */
export interface PhotometryRowError {
	row: number;
	message: string;
}

/** Refused photometry: `details` lists every problem, by CSV line or JSON row. */
export class PhotometryRefused extends CandidateError {
	constructor(
		message: string,
		readonly details: PhotometryLineError[] | PhotometryRowError[]
	) {
		super(422, 'invalid_photometry', message);
	}
}

/** One JSON row: the CSV's field names, plus the reported pointing it was measured on (optional). */
export const photometryRowInput = z.object({
	time: z.unknown().optional(),
	filter: z.unknown().optional(),
	mag: z.unknown().optional(),
	mag_err: z.unknown().optional(),
	limit: z.unknown().optional(),
	observationId: z.string().min(1).max(80).optional()
});
export const photometryJsonInput = z.object({
	rows: z.array(z.record(z.string(), z.unknown()), { error: 'rows must be a list of measurements' }).min(1, 'rows is empty').max(MAX_PHOTOMETRY_ROWS, `at most ${MAX_PHOTOMETRY_ROWS} rows at once`)
});

export interface PhotometryRow {
	id: string;
	time: string;
	filter: string;
	mag: number | null;
	magErr: number | null;
	limitMag: number | null;
	observationId: string | null;
	/** The person's name or 'telescope <name>'. */
	reportedBy: string;
	source: table.CandidatePhotometry['source'];
	createdAt: string;
}

export interface AddedPhotometry {
	added: number;
	photometry: PhotometryRow[];
	vetting: VetOutcome | null;
}

type Batch = { points: PhotometryPoint[]; observationIds: (string | null)[]; where: (k: number) => { line: number } | { row: number } };

const plural = (n: number, one: string, many = `${one}s`) => `${n} ${n === 1 ? one : many}`;

/** Checks that need the database or the clock: time not ahead of now, duplicates in the batch and already stored, pointings of this event. */
function checkAgainstStore(candidate: table.Candidate, batch: Batch, now: Date): { where: { line: number } | { row: number }; message: string }[] {
	const problems: { where: { line: number } | { row: number }; message: string }[] = [];
	const seen = new Map<string, number>();
	const stored = new Set(
		db
			.select({ filter: table.candidatePhotometry.filter, at: table.candidatePhotometry.observedAt })
			.from(table.candidatePhotometry)
			.where(eq(table.candidatePhotometry.candidateId, candidate.id))
			.all()
			.map((r) => `${r.filter}\u0000${r.at.getTime()}`)
	);
	const wanted = [...new Set(batch.observationIds.filter((x): x is string => x !== null))];
	const pointings = new Map(
		wanted.length
			? db
					.select({ id: table.observation.id, eventId: table.observation.eventId })
					.from(table.observation)
					.where(inArray(table.observation.id, wanted))
					.all()
					.map((o) => [o.id, o.eventId])
			: []
	);
	batch.points.forEach((p, k) => {
		const where = batch.where(k);
		if (p.timeMs > now.getTime() + 5 * MIN) problems.push({ where, message: `time ${p.time} is in the future` });
		const key = `${p.filter}\u0000${p.timeMs}`;
		const earlier = seen.get(key);
		if (earlier !== undefined) {
			const prev = batch.where(earlier);
			problems.push({ where, message: `repeats the ${p.filter} measurement at ${p.time} of ${'line' in prev ? `line ${prev.line}` : `row ${prev.row}`}` });
		} else seen.set(key, k);
		if (stored.has(key)) problems.push({ where, message: `a ${p.filter} measurement at ${p.time} is already stored for this candidate` });
		const obs = batch.observationIds[k];
		if (obs !== null) {
			const eventId = pointings.get(obs);
			if (eventId === undefined) problems.push({ where, message: `no reported pointing ${obs}` });
			else if (eventId !== candidate.eventId) problems.push({ where, message: `pointing ${obs} belongs to another event` });
		}
	});
	return problems;
}

function refuse(problems: { where: { line: number } | { row: number }; message: string }[]): never {
	const byLine = problems.every((p) => 'line' in p.where);
	const details = problems.map((p) => ({ ...p.where, message: p.message })) as PhotometryLineError[] | PhotometryRowError[];
	const first = problems[0];
	const at = 'line' in first.where ? `line ${first.where.line}` : `row ${first.where.row}`;
	throw new PhotometryRefused(
		`${plural(problems.length, 'problem')}; nothing stored. ${problems.length > 1 ? 'The first, ' : ''}${at}: ${first.message}`,
		byLine ? (details as PhotometryLineError[]) : (details as PhotometryRowError[])
	);
}

function store(reporter: CandidateReporter, candidateId: string, batch: Batch, source: table.CandidatePhotometry['source'], now: Date): number {
	try {
		db.transaction((tx) => {
			for (let k = 0; k < batch.points.length; k += 500) {
				tx.insert(table.candidatePhotometry)
					.values(
						batch.points.slice(k, k + 500).map((p, j) => ({
							id: randomId(),
							candidateId,
							observedAt: new Date(p.timeMs),
							filter: p.filter,
							mag: p.mag,
							magErr: p.magErr,
							limitMag: p.limitMag,
							observationId: batch.observationIds[k + j],
							reportedByUserId: reporter.user?.id ?? null,
							reportedByTokenId: reporter.user ? null : reporter.tokenId,
							source,
							createdAt: now
						}))
					)
					.run();
			}
		});
	} catch (e) {
		// Two uploads of one measurement at once: the unique index refuses the second whole.
		if (uniqueViolation(e)) throw new CandidateError(409, 'duplicate_photometry', 'Some of these measurements were stored meanwhile by another upload; nothing of this one was stored. Reload and send only the new rows.');
		throw e;
	}
	return batch.points.length;
}

/** Who may add, and to which candidate: the checks before a batch is read, and again after an upload was read on the work pool. */
function target(reporter: CandidateReporter, candidateId: string) {
	if (!can(reporter, 'candidates.photometry')) throw new CandidateError(403, 'forbidden', 'Your role does not allow reporting photometry.');
	const { candidate, event } = candidateForWork(candidateId, 'photometry is not taken');
	assertEventOpen(event, 'new photometry is not taken');
	return { candidate, event };
}

function addBatch(reporter: CandidateReporter, candidate: table.Candidate, event: table.GwEvent, batch: Batch, source: table.CandidatePhotometry['source'], now: Date): AddedPhotometry {
	const problems = checkAgainstStore(candidate, batch, now);
	if (problems.length) refuse(problems);
	const added = store(reporter, candidate.id, batch, source, now);
	const filters = [...new Set(batch.points.map((p) => p.filter))].sort();
	record(actorOfReporter(reporter), 'candidate.photometry', `event:${event.id}`, {
		candidateId: candidate.id,
		eventId: event.id,
		name: candidate.name,
		added,
		filters,
		detections: batch.points.filter((p) => p.mag !== null).length,
		upperLimits: batch.points.filter((p) => p.mag === null).length
	});
	const vetting = vetEvent(event.id, { candidateIds: [candidate.id], now })[0] ?? null;
	return { added, photometry: listPhotometry(candidate.id), vetting };
}

/**
 * Add photometry from CSV text (header `time,filter,mag,mag_err,limit`). Refusals as CandidateError:
 * 403, 404, 409 (retracted event; a concurrent upload of the same measurements); PhotometryRefused
 * (422) with `details` `[{ line, message }]` for every bad line, nothing stored. The file is read
 * and each row checked on the work pool (`readPhotometryUpload`); the checks against the store and
 * the storing happen here, after the candidate and its event are looked at again (either may have
 * changed while the file was read).
 */
export async function addPhotometryCsv(reporter: CandidateReporter, candidateId: string, csv: string, now = new Date(), source: 'csv' | 'form' = 'csv'): Promise<AddedPhotometry> {
	target(reporter, candidateId);
	const { parse, lines } = await runWork('readPhotometryUpload', { text: csv });
	if (!parse.ok) refuse(parse.errors.map((e) => ({ where: { line: e.line }, message: e.message })));
	const { candidate, event } = target(reporter, candidateId);
	// Line numbers of the data rows, for the checks against the store.
	const batch: Batch = { points: parse.points, observationIds: parse.points.map(() => null), where: (k) => ({ line: lines[k] }) };
	return addBatch(reporter, candidate, event, batch, source, now);
}

/**
 * Add photometry rows given as JSON, `{ rows: [{ time, filter, mag?, mag_err?, limit?, observationId? }] }`.
 * The same checks as a CSV line; problems are named by row (1-based) in `details` `[{ row, message }]`.
 */
export function addPhotometryRows(reporter: CandidateReporter, candidateId: string, body: unknown, now = new Date(), source: 'json' | 'form' = 'json'): AddedPhotometry {
	const { candidate, event } = target(reporter, candidateId);
	const batch = ((): Batch => {
		const parsed = photometryJsonInput.safeParse(body);
		if (!parsed.success) {
			const fields = fieldErrorsOf(parsed.error);
			throw new CandidateError(422, 'invalid', `${joinFields(fields)} (expected { rows: [{ time, filter, mag, mag_err, limit }] })`, fields);
		}
		const problems: { where: { row: number }; message: string }[] = [];
		const points: PhotometryPoint[] = [];
		const observationIds: (string | null)[] = [];
		parsed.data.rows.forEach((raw, k) => {
			const row = photometryRowInput.safeParse(raw);
			const unknown = Object.keys(raw).filter((f) => !['time', 'filter', 'mag', 'mag_err', 'limit', 'observationId'].includes(f));
			for (const f of unknown) problems.push({ where: { row: k + 1 }, message: `unknown field "${f}" (expected time, filter, mag, mag_err, limit, observationId)` });
			if (!row.success) {
				problems.push({ where: { row: k + 1 }, message: 'observationId must be a pointing id' });
				return;
			}
			const r = checkPhotometryRow(row.data as Parameters<typeof checkPhotometryRow>[0]);
			if (!r.ok) for (const message of r.errors) problems.push({ where: { row: k + 1 }, message });
			else {
				points.push(r.point);
				observationIds.push(row.data.observationId ?? null);
			}
		});
		if (problems.length) refuse(problems);
		return { points, observationIds, where: (k) => ({ row: k + 1 }) };
	})();
	return addBatch(reporter, candidate, event, batch, source, now);
}

/** A candidate's photometry, oldest first, with who reported each row. */
export function listPhotometry(candidateId: string): PhotometryRow[] {
	return db
		.select({
			p: table.candidatePhotometry,
			userName: table.user.name,
			tokenTelescope: table.telescope.name
		})
		.from(table.candidatePhotometry)
		.leftJoin(table.user, eq(table.user.id, table.candidatePhotometry.reportedByUserId))
		.leftJoin(table.apiToken, eq(table.apiToken.id, table.candidatePhotometry.reportedByTokenId))
		.leftJoin(table.telescope, and(eq(table.telescope.id, table.apiToken.telescopeId)))
		.where(eq(table.candidatePhotometry.candidateId, candidateId))
		.orderBy(asc(table.candidatePhotometry.observedAt), asc(table.candidatePhotometry.filter))
		.all()
		.map(({ p, userName, tokenTelescope }) => ({
			id: p.id,
			time: p.observedAt.toISOString(),
			filter: p.filter,
			mag: p.mag,
			magErr: p.magErr,
			limitMag: p.limitMag,
			observationId: p.observationId,
			reportedBy: userName ?? (tokenTelescope ? `telescope ${tokenTelescope}` : p.reportedByTokenId ? 'a telescope token' : '—'),
			source: p.source,
			createdAt: p.createdAt.toISOString()
		}));
}
