/**
 * Reported observations: pointings a team made (by form, CSV upload, or a robotic telescope's
 * token). Each pointing completes the reporting telescope's open claims it covers: galaxy
 * claims whose galaxy lies inside the telescope's footprint centred on the pointing, and field
 * claims whose field centre lies inside it.
 */
import { and, asc, eq, inArray, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId, type SessionUser } from '../people/auth';
import { actorOf, record, type Actor } from '../platform/realtime';
import { footprintContains, footprintGeometry } from '../../targeting/sky-geometry.ts';
import { footprintOf } from '../../targeting/telescope.ts';
import { fieldErrors, observationInput, type ObservationInput, type PointingCsvParse } from '../../coordination/pointings.ts';
import { runWork } from '../platform/work-pool';
import { slices, type Slices } from '../platform/slices';
import { DomainError } from '../platform/errors';
import { mayUseTelescope } from '../people/scope';
import { getTelescope } from '../people/telescopes';
import { assertEventOpen } from '../alerts/events';

const MIN = 60_000;
const DAY = 24 * 60 * MIN;

export class ObservationError extends DomainError {}

export { fieldErrors, observationInput, type CsvPointing, type ObservationInput } from '../../coordination/pointings.ts';

/** Who reports: a person (observer of the telescope's team, or a coordinator) or a telescope token. */
export type Reporter = { user: SessionUser; telescopeId?: null; tokenId?: null } | { user: null; telescopeId: string; tokenId: string | null };

export interface ReportResult {
	observation: table.Observation;
	completedClaimIds: string[];
}

/**
 * Store one pointing and complete the open claims it covers. Validation beyond the schema:
 * the event is not retracted; the time is at most 5 minutes ahead of `now` and not before the
 * merger (or, when the merger time is unknown, not more than 1 day before the event arrived); the
 * filter is one of the telescope's (compared case-sensitively, since 'r' and 'R' are different
 * bands in common practice).
 */
export function report(reporter: Reporter, raw: ObservationInput, source: table.Observation['source'], now = new Date()): ReportResult {
	const p = prepare(reporter, raw, now, new Lookups());
	const [result] = storeAll(reporter, [p], now, source);
	const row = result.observation;
	const actor = actorFor(reporter, p.scope);
	const room = `event:${p.event.id}` as const;
	for (const c of result.completed) recordDone(actor, c, row.id);
	record(actor, 'observation.reported', room, {
		observationId: row.id,
		eventId: p.event.id,
		telescopeId: p.scope.id,
		teamId: p.scope.teamId,
		source,
		raDeg: row.raDeg,
		decDeg: row.decDeg,
		fieldId: row.fieldId,
		filter: row.filter,
		exposureS: row.exposureS,
		limitingMag: row.limitingMag,
		completedClaimIds: result.completedClaimIds
	});
	return { observation: row, completedClaimIds: result.completedClaimIds };
}

/**
 * Store several pointings (a CSV upload) all or nothing: every row is validated first, and a
 * single bad row stores none, with each problem numbered by its CSV line (`lines[i]`).
 * Checking and storing go in slices of UPLOAD_SLICE_MS with a rest as long between them, the rows
 * stored STORE_CHUNK per transaction (9,000 rows in one transaction held the server's thread for
 * about a quarter of a second, and every live message waited behind it); should a later chunk
 * fail, what the earlier ones stored is taken back (`undoStored`). They are announced with ONE live message per event
 * and telescope (`observation.uploaded`), not one per row, once all are stored: an upload of
 * thousands of pointings is one thing that happened, and each message costs an event-log row and
 * a refresh in every open page.
 */
export async function reportMany(
	reporter: Reporter,
	inputs: ObservationInput[],
	source: table.Observation['source'],
	o: { lines?: number[]; now?: Date } = {}
): Promise<{ results: ReportResult[]; errors: { line: number; message: string }[] }> {
	const now = o.now ?? new Date();
	// A closed event refuses the whole upload with one sentence rather than the same one per line.
	for (const eventId of new Set(inputs.map((i) => i.eventId))) if (eventId) assertEventOpen(eventId, 'new pointings are not recorded');
	const errors: { line: number; message: string }[] = [];
	const prepared: Prepared[] = [];
	const lookups = new Lookups();
	// Checked and stored in slices with rests between (UPLOAD_SLICE_MS): in one piece, checking
	// 9,000 rows held the server's thread ≈ 0.1 s and storing them ≈ 0.25 s (the live bench's
	// upload), and every live message waited behind it.
	const work = slices(UPLOAD_SLICE_MS, UPLOAD_SLICE_MS);
	for (let i = 0; i < inputs.length; i++) {
		await work.pause();
		try {
			prepared.push(prepare(reporter, inputs[i], now, lookups));
		} catch (e) {
			errors.push({ line: o.lines?.[i] ?? i + 1, message: (e as Error).message });
		}
	}
	if (errors.length) return { results: [], errors };
	const stored = await storeInChunks(reporter, prepared, now, source, work);

	const groups = new Map<string, { p: Prepared; rows: StoredPointing[] }>();
	stored.forEach((s, i) => {
		const key = `${prepared[i].event.id}|${prepared[i].scope.id}`;
		const g = groups.get(key) ?? groups.set(key, { p: prepared[i], rows: [] }).get(key)!;
		g.rows.push(s);
	});
	for (const { p, rows } of groups.values()) {
		const times = rows.map((r) => r.observation.observedAt.getTime());
		record(actorFor(reporter, p.scope), 'observation.uploaded', `event:${p.event.id}`, {
			eventId: p.event.id,
			telescopeId: p.scope.id,
			teamId: p.scope.teamId,
			source,
			count: rows.length,
			filters: [...new Set(rows.map((r) => r.observation.filter))],
			firstObservedAt: new Date(Math.min(...times)).toISOString(),
			lastObservedAt: new Date(Math.max(...times)).toISOString(),
			completed: rows.filter((r) => r.completedClaimIds.length).map((r) => ({ observationId: r.observation.id, claimIds: r.completedClaimIds }))
		});
	}
	return { results: stored.map(({ observation, completedClaimIds }) => ({ observation, completedClaimIds })), errors: [] };
}

interface Prepared {
	input: ObservationInput;
	scope: table.Telescope;
	event: table.GwEvent;
	raDeg: number;
	decDeg: number;
	observedAt: Date;
}

/**
 * The rows one report or upload refers to, each read from the database once: an upload of
 * thousands of pointings from one telescope for one event asks for that telescope and event once.
 */
class Lookups {
	private readonly telescopes = new Map<string, table.Telescope | null>();
	private readonly events = new Map<string, table.GwEvent | null>();
	private readonly fields = new Map<string, { raDeg: number; decDeg: number } | null>();

	telescope(id: string): table.Telescope | null {
		if (!this.telescopes.has(id)) this.telescopes.set(id, getTelescope(id));
		return this.telescopes.get(id)!;
	}

	event(id: string): table.GwEvent | null {
		if (!this.events.has(id)) this.events.set(id, db.select().from(table.gwEvent).where(eq(table.gwEvent.id, id)).get() ?? null);
		return this.events.get(id)!;
	}

	field(eventId: string, telescopeId: string, fieldId: string): { raDeg: number; decDeg: number } | null {
		const key = JSON.stringify([eventId, telescopeId, fieldId]);
		if (!this.fields.has(key)) {
			const f = db
				.select({ raDeg: table.eventField.raDeg, decDeg: table.eventField.decDeg })
				.from(table.eventField)
				.where(and(eq(table.eventField.eventId, eventId), eq(table.eventField.telescopeId, telescopeId), eq(table.eventField.fieldId, fieldId)))
				.get();
			this.fields.set(key, f ?? null);
		}
		return this.fields.get(key)!;
	}
}

/** The refusal of a pointing whose fields break the rules: each field's message, and all of them joined. */
function invalidPointing(fields: Record<string, string>): ObservationError {
	return new ObservationError(
		422,
		'invalid',
		Object.values(fields).join(' '),
		fields
	);
}

/** An instant as ISO-8601 UTC, without the milliseconds when there are none. */
function isoUtc(at: Date): string {
	return at.toISOString().replace('.000Z', 'Z');
}

/** Validate one pointing against its telescope and event; throws ObservationError. */
function prepare(reporter: Reporter, raw: ObservationInput, now: Date, lookups: Lookups): Prepared {
	const parsed = observationInput.safeParse(raw);
	if (!parsed.success) throw invalidPointing(fieldErrors(parsed.error));
	const input = parsed.data;
	const telescopeId = reporter.user ? input.telescopeId : reporter.telescopeId;
	if (!telescopeId) throw new ObservationError(422, 'invalid', 'Telescope is missing: say which telescope made the pointing.', { telescopeId: 'Telescope is missing: say which telescope made the pointing.' });
	if (!reporter.user && input.telescopeId && input.telescopeId !== reporter.telescopeId)
		throw new ObservationError(403, 'forbidden', "A telescope token reports for its own telescope only.");
	const scope = lookups.telescope(telescopeId);
	if (!scope) throw new ObservationError(404, 'not_found', `No telescope ${telescopeId}.`);
	if (reporter.user && !mayUseTelescope(reporter.user, scope))
		throw new ObservationError(403, 'forbidden', `Telescope ${scope.name} belongs to a team you are not a member of.`);
	const event = lookups.event(input.eventId);
	if (!event) throw new ObservationError(404, 'not_found', `No event ${input.eventId}.`);
	assertEventOpen(event, 'new pointings are not recorded');
	// A retracted event has nothing left to cover: a pointing reported now would only inflate its coverage.
	if (event.state === 'retracted')
		throw new ObservationError(
			409,
			'event_retracted',
			`${event.sourceEventId} was retracted by the source${event.retractedAt ? ` (${isoUtc(event.retractedAt)})` : ''}: observations are no longer recorded for it. Stop follow-up for this event.`
		);

	const fields: Record<string, string> = {};
	const observedAt = new Date(input.observedAt);
	if (observedAt.getTime() > now.getTime() + 5 * MIN) fields.observedAt = 'Time (UTC) is more than 5 minutes in the future.';
	if (event.eventTime) {
		// Light from before the merger cannot hold its counterpart: such a pointing is not coverage.
		if (observedAt.getTime() < event.eventTime.getTime())
			fields.observedAt = `This pointing (${isoUtc(observedAt)}) was taken before the merger at ${isoUtc(event.eventTime)}; only pointings after the merger count.`;
	} else if (observedAt.getTime() < event.createdAt.getTime() - DAY) {
		fields.observedAt = 'Time (UTC) is more than 1 day before the event arrived (its merger time is not known).';
	}
	if (!scope.filters.includes(input.filter))
		fields.filter = `The filter "${input.filter}" is not one of ${scope.name}'s filters (${scope.filters.join(', ')}; case-sensitive).`;

	let raDeg = input.raDeg;
	let decDeg = input.decDeg;
	if (raDeg === undefined || decDeg === undefined) {
		const f = lookups.field(event.id, scope.id, input.fieldId!);
		if (!f) fields.fieldId = `Field ${input.fieldId} is not among this event's fields for ${scope.name}; give RA and Dec instead.`;
		else ({ raDeg, decDeg } = f);
	}
	if (Object.keys(fields).length) throw invalidPointing(fields);

	return { input, scope, event, raDeg: raDeg!, decDeg: decDeg!, observedAt };
}

function actorFor(reporter: Reporter, scope: table.Telescope): Actor {
	return reporter.user ? actorOf(reporter.user) : { userId: null, label: `telescope ${scope.name}` };
}

function recordDone(actor: Actor, c: table.Claim, observationId: string): void {
	record(actor, 'claim.done', `event:${c.eventId}`, { claimId: c.id, eventId: c.eventId, targetKind: c.targetKind, targetId: c.targetId, telescopeId: c.telescopeId, teamId: c.teamId, state: c.state, observationId });
}

interface StoredPointing {
	observation: table.Observation;
	completedClaimIds: string[];
	completed: table.Claim[];
	/** Each completed claim's state and done time before (to take an upload back). */
	claimsBefore: Map<string, Pick<table.Claim, 'state' | 'doneAt'>>;
}

/**
 * Store validated pointings in ONE transaction, completing the open claims each covers, in the
 * order given (a claim completed by an earlier pointing is not completed again). The open claims
 * and their targets' positions are read once per event and telescope.
 */
/**
 * Rows stored per transaction by `reportMany` (≈ 5 ms each; at 1,000 a transaction held the
 * server's thread ≈ 20 ms, and the live bench's broadcasts queued behind an upload's nine).
 */
const STORE_CHUNK = 250;
/** An upload's slices of checking and storing, and the rests between them (ms). */
const UPLOAD_SLICE_MS = 4;

type OpenClaims = Map<string, { open: table.Claim[]; position: (c: table.Claim) => { raDeg: number; decDeg: number } | undefined }>;

async function storeInChunks(reporter: Reporter, prepared: Prepared[], now: Date, source: table.Observation['source'], work: Slices): Promise<StoredPointing[]> {
	const openBy: OpenClaims = new Map();
	const out: StoredPointing[] = [];
	try {
		for (let k = 0; k < prepared.length; k += STORE_CHUNK) {
			await work.pause();
			for (const s of storeAll(reporter, prepared.slice(k, k + STORE_CHUNK), now, source, openBy)) out.push(s);
		}
	} catch (e) {
		undoStored(out);
		throw e;
	}
	return out;
}

/** Take back what earlier chunks of a failed upload stored: its pointings, and its claims returned to where they were. */
function undoStored(stored: StoredPointing[]): void {
	if (!stored.length) return;
	db.transaction((tx) => {
		for (let k = 0; k < stored.length; k += 500) {
			tx.delete(table.observation).where(inArray(table.observation.id, stored.slice(k, k + 500).map((s) => s.observation.id))).run();
		}
		for (const s of stored) {
			for (const [claimId, from] of s.claimsBefore) {
				tx.update(table.claim).set({ state: from.state, doneAt: from.doneAt }).where(and(eq(table.claim.id, claimId), eq(table.claim.state, 'done'))).run();
			}
		}
	});
}

function storeAll(reporter: Reporter, prepared: Prepared[], now: Date, source: table.Observation['source'], openBy: OpenClaims = new Map()): StoredPointing[] {
	const openFor = (p: Prepared) => {
		const key = `${p.event.id}|${p.scope.id}`;
		let entry = openBy.get(key);
		if (!entry) {
			const open = db
				.select()
				.from(table.claim)
				.where(and(eq(table.claim.eventId, p.event.id), eq(table.claim.telescopeId, p.scope.id), inArray(table.claim.state, [...table.OPEN_CLAIM_STATES])))
				.all();
			const galaxyIds = open.filter((c) => c.targetKind === 'galaxy').map((c) => Number(c.targetId));
			const galaxyPos = new Map(
				galaxyIds.length
					? db
							.select({ id: table.galaxy.id, raDeg: table.galaxy.raDeg, decDeg: table.galaxy.decDeg })
							.from(table.galaxy)
							.where(inArray(table.galaxy.id, galaxyIds))
							.all()
							.map((g) => [String(g.id), g] as const)
					: []
			);
			const fieldIds = open.filter((c) => c.targetKind === 'field').map((c) => c.targetId);
			const fieldPos = new Map(
				fieldIds.length
					? db
							.select({ id: table.eventField.fieldId, raDeg: table.eventField.raDeg, decDeg: table.eventField.decDeg })
							.from(table.eventField)
							.where(and(eq(table.eventField.eventId, p.event.id), inArray(table.eventField.fieldId, fieldIds)))
							.all()
							.map((f) => [f.id, f] as const)
					: []
			);
			entry = { open, position: (c) => (c.targetKind === 'galaxy' ? galaxyPos.get(c.targetId) : fieldPos.get(c.targetId)) };
			openBy.set(key, entry);
		}
		return entry;
	};

	// One prepared INSERT run per row: the query builder's cost per row was most of a large upload's time.
	const insert = db.$client.prepare(
		`INSERT INTO observation (id, event_id, telescope_id, team_id, reported_by_user_id, reported_by_token_id, observed_at, ra_deg, dec_deg,
		 field_id, filter, exposure_s, limiting_mag, seeing_arcsec, notes, source, claim_id, created_at) VALUES (${Array(18).fill('?').join(', ')})`
	);
	return db.transaction((tx) => {
		const out: StoredPointing[] = [];
		const createdAt = new Date();
		for (const p of prepared) {
			const { input, scope, event, raDeg, decDeg, observedAt } = p;
			const entry = openFor(p);
			const completed: table.Claim[] = [];
			const claimsBefore: StoredPointing['claimsBefore'] = new Map();
			if (entry.open.length) {
				const footprint = footprintGeometry({ raDeg, decDeg, ...footprintOf(scope) });
				const covered = entry.open.filter((c) => {
					if (c.filter !== '' && c.filter !== input.filter) return false;
					if (c.targetKind === 'field' && input.fieldId === c.targetId) return true;
					const at = entry.position(c);
					return at ? footprintContains(footprint, at.raDeg, at.decDeg) : false;
				});
				for (const c of covered) {
					claimsBefore.set(c.id, { state: c.state, doneAt: c.doneAt });
					const u = tx
						.update(table.claim)
						.set({ state: 'done', doneAt: now })
						.where(and(eq(table.claim.id, c.id), inArray(table.claim.state, [...table.OPEN_CLAIM_STATES])))
						.returning()
						.get();
					if (u) completed.push(u);
				}
				if (covered.length) entry.open = entry.open.filter((c) => !covered.includes(c));
			}
			const row: table.Observation = {
				id: randomId(),
				eventId: event.id,
				telescopeId: scope.id,
				teamId: scope.teamId,
				reportedByUserId: reporter.user?.id ?? null,
				reportedByTokenId: reporter.user ? null : reporter.tokenId,
				observedAt,
				raDeg,
				decDeg,
				fieldId: input.fieldId ?? null,
				filter: input.filter,
				exposureS: input.exposureS,
				limitingMag: input.limitingMag,
				seeingArcsec: input.seeingArcsec ?? null,
				notes: input.notes ?? '',
				source,
				claimId: completed[0]?.id ?? null,
				createdAt
			};
			insert.run(
				row.id, row.eventId, row.telescopeId, row.teamId, row.reportedByUserId, row.reportedByTokenId, row.observedAt.getTime(), row.raDeg, row.decDeg,
				row.fieldId, row.filter, row.exposureS, row.limitingMag, row.seeingArcsec, row.notes, row.source, row.claimId, row.createdAt.getTime()
			);
			out.push({ observation: row, completedClaimIds: completed.map((c) => c.id), completed, claimsBefore });
		}
		return out;
	});
}

/**
 * Read an uploaded CSV of pointings on the work pool (csv-parse and each row's own rules,
 * `parsePointingCsv` in lib/coordination/pointings.ts): all or nothing, every problem with its
 * 1-based line. What needs the database (telescope, event, fields) is `reportMany`'s.
 */
export async function parseObservationCsv(text: string): Promise<PointingCsvParse> {
	return runWork('readPointingCsv', { text });
}

export interface PointingView extends table.Observation {
	telescopeName: string;
	teamName: string;
	/** The person's name, or 'telescope <name>' for a token. */
	reportedBy: string;
}

/** Every pointing reported for an event, by observation time, with names for telescope, team and reporter. */
/**
 * An event's pointings with their team, telescope (name and field of view) and reporting person, in
 * the order they were taken (simultaneous ones in the order they were reported). The one query behind
 * coverage, the record and the replay. `afterRowId`: only those stored after that row (`rowId`), for
 * a caller that keeps the earlier ones.
 */
export function pointingsWithOptics(eventId: string, afterRowId?: number) {
	return db
		.select({
			rowId: sql<number>`observation.rowid`,
			o: table.observation,
			teamName: table.team.name,
			telescopeName: table.telescope.name,
			fovShape: table.telescope.fovShape,
			fovWidthDeg: table.telescope.fovWidthDeg,
			fovHeightDeg: table.telescope.fovHeightDeg,
			reporter: table.user.name
		})
		.from(table.observation)
		.innerJoin(table.telescope, eq(table.telescope.id, table.observation.telescopeId))
		.innerJoin(table.team, eq(table.team.id, table.observation.teamId))
		.leftJoin(table.user, eq(table.user.id, table.observation.reportedByUserId))
		.where(afterRowId === undefined ? eq(table.observation.eventId, eventId) : and(eq(table.observation.eventId, eventId), sql`observation.rowid > ${afterRowId}`))
		.orderBy(asc(table.observation.observedAt), sql`observation.rowid`)
		.all();
}

export function listPointings(eventId: string): PointingView[] {
	return db
		.select({
			o: table.observation,
			telescopeName: table.telescope.name,
			teamName: table.team.name,
			userName: table.user.name,
			tokenTelescopeName: sql<string | null>`(SELECT t.name FROM api_token k JOIN telescope t ON t.id = k.telescope_id WHERE k.id = ${table.observation.reportedByTokenId})`
		})
		.from(table.observation)
		.innerJoin(table.telescope, eq(table.telescope.id, table.observation.telescopeId))
		.innerJoin(table.team, eq(table.team.id, table.observation.teamId))
		.leftJoin(table.user, eq(table.user.id, table.observation.reportedByUserId))
		.where(eq(table.observation.eventId, eventId))
		.orderBy(asc(table.observation.observedAt), asc(table.observation.createdAt))
		.all()
		.map(({ o, telescopeName, teamName, userName, tokenTelescopeName }) => ({
			...o,
			telescopeName,
			teamName,
			reportedBy: userName ?? (tokenTelescopeName ? `telescope ${tokenTelescopeName}` : o.reportedByTokenId ? 'a telescope token' : '—')
		}));
}
