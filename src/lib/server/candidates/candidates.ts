/**
 * Transient candidates: sources a team found in its images during an event, reported by form,
 * the API, or a robotic telescope's token. Names are the teams' own designations, unique per
 * event regardless of case. A candidate within NEAR_ARCSEC of one already reported for the
 * same event is stored all the same, and the answer names the earlier one: two teams finding
 * the same transient is common, and only they can tell whether it is one source or two.
 * Classification (from spectra) is a later step; its column stays null here.
 */
import { and, between, desc, eq, ne, sql, type SQL } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId, type SessionUser } from '../people/auth';
import { actorOf, record, type Actor } from '../platform/realtime';
import { can } from '../people/permissions';
import { DomainError } from '../platform/errors';
import { actsForEveryTeam, mayUseTeam, mayUseTelescope } from '../people/scope';
import { getTelescope } from '../people/telescopes';
import { assertEventOpen } from '../alerts/events';
import { POSITION_ERR_ARCSEC_MAX } from '../../limits';
import '../../field-messages';

const MIN = 60_000;
const DAY = 24 * 60 * MIN;
const DEG = Math.PI / 180;

/** Separation below which a new candidate is flagged as a possible duplicate (common practice for optical astrometry). */
export const NEAR_ARCSEC = 2;

export class CandidateError extends DomainError {}

const RA_RANGE = 'RA (deg, J2000) must be from 0 up to (not including) 360.';
const DEC_RANGE = 'Dec (deg, J2000) must be from −90 to 90.';
const MAG_RANGE = 'Magnitude (AB) must be from 5 to 30.';
const MAG_ERR_RANGE = 'Magnitude error must be from 0 to 5.';
const POSITION_ERR_RANGE = `Position uncertainty (arcsec) must be more than 0 and at most ${POSITION_ERR_ARCSEC_MAX}.`;

/** One candidate as reported. Numbers are numbers (forms convert first); times are ISO 8601. */
export const candidateInput = z.object({
	eventId: z.string().min(1).max(80),
	name: z
		.string({ error: 'Name is required.' })
		.trim()
		.min(1, 'Name is required.')
		.max(40, 'Name may be at most 40 characters.')
		.regex(/^[A-Za-z0-9._-]+$/, 'Name may contain letters, digits, "-", "_" and "." only.'),
	raDeg: z.number().min(0, RA_RANGE).lt(360, RA_RANGE),
	decDeg: z.number().min(-90, DEC_RANGE).max(90, DEC_RANGE),
	/** Radius of the position's uncertainty, arcsec (the team's own figure: 1σ or the radius they quote). */
	positionErrArcsec: z.number().gt(0, POSITION_ERR_RANGE).max(POSITION_ERR_ARCSEC_MAX, POSITION_ERR_RANGE).optional(),
	discoveredAt: z.iso.datetime({ offset: true }),
	magnitude: z.number().min(5, MAG_RANGE).max(30, MAG_RANGE),
	magnitudeErr: z.number().min(0, MAG_ERR_RANGE).max(5, MAG_ERR_RANGE).optional(),
	filter: z.string({ error: 'Filter is required.' }).trim().min(1, 'Filter is required.').max(10, 'Filter may be at most 10 characters.'),
	telescopeId: z.string().min(1).max(80).optional(),
	teamId: z.string().min(1).max(80).optional(),
	notes: z.string().max(2000, 'Notes may be at most 2000 characters.').optional()
});
export type CandidateInput = z.input<typeof candidateInput>;

/** Who reports: a person (observer or coordinator) or a telescope's token (no person behind it). */
export type CandidateReporter = { user: SessionUser; telescopeId?: null; tokenId?: null } | { user: null; telescopeId: string; tokenId: string | null };

/** An earlier (or later) candidate of the same event close on the sky. */
export interface NearCandidate {
	id: string;
	name: string;
	teamName: string;
	separationArcsec: number;
}

/** A candidate as pages and the API show it. Times are ISO 8601 UTC. */
export interface CandidateRow {
	id: string;
	eventId: string;
	name: string;
	raDeg: number;
	decDeg: number;
	/** Radius of the position's uncertainty, arcsec; null when the team gave none. */
	positionErrArcsec: number | null;
	discoveredAt: string;
	magnitude: number;
	magnitudeErr: number | null;
	filter: string;
	telescopeId: string | null;
	telescopeName: string | null;
	teamId: string;
	teamName: string;
	/** The person's name, or 'telescope <name>' for a token. */
	reportedBy: string;
	notes: string;
	/** The label every current classification agrees on, 'disputed', or null before any. */
	classification: string | null;
	/** Open, rejected (with a reason, see the decisions) or promoted for a spectrum. */
	state: table.Candidate['state'];
	createdAt: string;
	/** Other candidates of the event within NEAR_ARCSEC, nearest first. */
	near: NearCandidate[];
}

export interface ReportedCandidate {
	candidate: CandidateRow;
	/** A sentence naming the nearest earlier candidate within NEAR_ARCSEC, or null. */
	warning: string | null;
}

/**
 * Angular separation of two points on the sphere, degrees, by the Vincenty formula for the
 * sphere (the special case of Vincenty 1975, Survey Review 23, 88, for equal axes; reference
 * from memory):
 *   Δσ = atan2( √[(cos δ₂ sin Δα)² + (cos δ₁ sin δ₂ − sin δ₁ cos δ₂ cos Δα)²],
 *               sin δ₁ sin δ₂ + cos δ₁ cos δ₂ cos Δα ).
 * Unlike the plain cosine rule it keeps full precision at arcsecond separations, and unlike the
 * haversine form it stays exact near 180°. Checked against astropy's SkyCoord.separation
 * (tests/fixtures/candidates/).
 */
export function angularSeparationDeg(ra1Deg: number, dec1Deg: number, ra2Deg: number, dec2Deg: number): number {
	const d1 = dec1Deg * DEG;
	const d2 = dec2Deg * DEG;
	const dAlpha = (ra2Deg - ra1Deg) * DEG;
	const sd1 = Math.sin(d1);
	const cd1 = Math.cos(d1);
	const sd2 = Math.sin(d2);
	const cd2 = Math.cos(d2);
	const cda = Math.cos(dAlpha);
	const a = cd2 * Math.sin(dAlpha);
	const b = cd1 * sd2 - sd1 * cd2 * cda;
	return Math.atan2(Math.hypot(a, b), sd1 * sd2 + cd1 * cd2 * cda) / DEG;
}

/** Whether a database error is a unique-index violation (the index decided a race). */
export function uniqueViolation(e: unknown): boolean {
	for (let c: unknown = e; c && typeof c === 'object'; c = (c as { cause?: unknown }).cause) {
		if ((c as { code?: unknown }).code === 'SQLITE_CONSTRAINT_UNIQUE') return true;
		if ((c as { cause?: unknown }).cause === c) break;
	}
	return false;
}

export function fieldErrorsOf(e: z.ZodError): Record<string, string> {
	const out: Record<string, string> = {};
	for (const i of e.issues) out[i.path.join('.') || 'body'] ??= i.message;
	return out;
}

/** Every field's message, one sentence after another (the messages name their fields in people's words). */
export const joinFields = (fields: Record<string, string>) => Object.values(fields).join(' ');

/** The candidate already holding this name in the event (case-insensitive), with its team. */
function holderOfName(eventId: string, name: string) {
	return db
		.select({ name: table.candidate.name, teamName: table.team.name })
		.from(table.candidate)
		.innerJoin(table.team, eq(table.team.id, table.candidate.teamId))
		.where(and(eq(table.candidate.eventId, eventId), sql`lower(${table.candidate.name}) = lower(${name})`))
		.get();
}

/** Candidates of one event within NEAR_ARCSEC of a point, nearest first (a Dec band first, then the exact separation). */
function nearTo(eventId: string, raDeg: number, decDeg: number, exceptId?: string): NearCandidate[] {
	const bandDeg = NEAR_ARCSEC / 3600 + 1e-9;
	const rows = db
		.select({ id: table.candidate.id, name: table.candidate.name, raDeg: table.candidate.raDeg, decDeg: table.candidate.decDeg, teamName: table.team.name })
		.from(table.candidate)
		.innerJoin(table.team, eq(table.team.id, table.candidate.teamId))
		.where(
			and(
				eq(table.candidate.eventId, eventId),
				between(table.candidate.decDeg, decDeg - bandDeg, decDeg + bandDeg),
				exceptId ? ne(table.candidate.id, exceptId) : undefined
			)
		)
		.all();
	return rows
		.map((r) => ({ id: r.id, name: r.name, teamName: r.teamName, separationArcsec: angularSeparationDeg(raDeg, decDeg, r.raDeg, r.decDeg) * 3600 }))
		.filter((r) => r.separationArcsec <= NEAR_ARCSEC)
		.sort((a, b) => a.separationArcsec - b.separationArcsec);
}

/**
 * The team a report is for. A telescope (the token's, or one named by a person) decides it; a
 * person without a telescope reports for their only team or the one they name among theirs;
 * coordinators may name any team.
 */
function resolveScope(reporter: CandidateReporter, input: z.output<typeof candidateInput>): { scope: table.Telescope | null; teamId: string } {
	const telescopeId = reporter.user ? input.telescopeId : reporter.telescopeId;
	if (!reporter.user && input.telescopeId && input.telescopeId !== reporter.telescopeId)
		throw new CandidateError(403, 'forbidden', 'A telescope token reports for its own telescope only.');
	const coordinator = reporter.user ? actsForEveryTeam(reporter.user) : false;
	if (telescopeId) {
		const scope = getTelescope(telescopeId);
		if (!scope) throw new CandidateError(404, 'not_found', `No telescope ${telescopeId}.`, { telescopeId: 'Telescope is not known.' });
		if (reporter.user && !mayUseTelescope(reporter.user, scope))
			throw new CandidateError(403, 'forbidden', `Telescope ${scope.name} belongs to a team you are not a member of.`, { telescopeId: 'Telescope is not one of your teams’ telescopes.' });
		if (input.teamId && input.teamId !== scope.teamId)
			throw new CandidateError(422, 'invalid', `${scope.name} belongs to another team; leave the team out or give the telescope's team.`, {
				teamId: `${scope.name} belongs to another team.`
			});
		return { scope, teamId: scope.teamId };
	}
	const user = reporter.user!;
	if (input.teamId) {
		if (!mayUseTeam(user, input.teamId))
			throw new CandidateError(403, 'forbidden', 'You may report only for a team you are a member of.', { teamId: 'Team is not one of yours.' });
		if (!db.select({ id: table.team.id }).from(table.team).where(eq(table.team.id, input.teamId)).get())
			throw new CandidateError(404, 'not_found', `No team ${input.teamId}.`, { teamId: 'Team is not known.' });
		return { scope: null, teamId: input.teamId };
	}
	if (!coordinator && user.teamIds.length === 1) return { scope: null, teamId: user.teamIds[0] };
	if (!coordinator && user.teamIds.length === 0) throw new CandidateError(403, 'forbidden', 'You are not a member of any team, so there is no team to report for.');
	throw new CandidateError(422, 'invalid', 'Team is missing: choose the team this candidate is reported for (or the telescope).', { teamId: 'Team is missing: choose the team (or the telescope).' });
}

/**
 * Record a candidate for an event and announce it (`candidate.reported`, room `event:{id}`,
 * after the insert has committed). Refusals, as CandidateError: 403 without the permission or
 * for another team; 404 unknown event, telescope or team; 409 a retracted event, or a name the
 * event already has (the message names the team that holds it); 422 bad fields, each named:
 * discoveredAt more than 5 minutes ahead of `now` (clock skew) or more than 1 day before the
 * merger (the observations' rule), a filter the telescope does not list (case-sensitive: 'r' and
 * 'R' are different bands in common practice). Within NEAR_ARCSEC of an earlier candidate it is
 * stored and `warning` names the nearest.
 */
export function reportCandidate(reporter: CandidateReporter, raw: CandidateInput, now = new Date()): ReportedCandidate {
	if (!can(reporter, 'candidates.report')) throw new CandidateError(403, 'forbidden', 'Your role does not allow reporting candidates.');
	const eventId = typeof raw?.eventId === 'string' ? raw.eventId : '';
	const event = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!event) throw new CandidateError(404, 'not_found', `No event ${eventId || '(none given)'}.`);
	assertEventOpen(event, 'new candidates are not taken');
	if (event.state === 'retracted')
		throw new CandidateError(409, 'event_retracted', `Event ${event.sourceEventId} was retracted by its source; new candidates are not taken, so that no telescope time goes to a false alert.`);
	const parsed = candidateInput.safeParse(raw);
	if (!parsed.success) {
		const fields = fieldErrorsOf(parsed.error);
		throw new CandidateError(422, 'invalid', joinFields(fields), fields);
	}
	const input = parsed.data;
	const { scope, teamId } = resolveScope(reporter, input);

	const fields: Record<string, string> = {};
	const discoveredAt = new Date(input.discoveredAt);
	const eventTime = event.eventTime ?? event.createdAt;
	if (discoveredAt.getTime() > now.getTime() + 5 * MIN) fields.discoveredAt = 'Discovered (UTC) is more than 5 minutes in the future.';
	else if (discoveredAt.getTime() < eventTime.getTime() - DAY) fields.discoveredAt = 'Discovered (UTC) is more than 1 day before the merger.';
	if (scope && !scope.filters.includes(input.filter))
		fields.filter = `The filter "${input.filter}" is not one of ${scope.name}'s filters (${scope.filters.join(', ')}; case-sensitive).`;
	if (Object.keys(fields).length) throw new CandidateError(422, 'invalid', joinFields(fields), fields);

	const taken = (holder: { name: string; teamName: string } | undefined) =>
		new CandidateError(409, 'name_taken', `Candidate ${holder?.name ?? input.name} is already reported for this event by ${holder?.teamName ?? 'another team'}.`, {
			name: `Name already reported by ${holder?.teamName ?? 'another team'}.`
		});
	const holder = holderOfName(event.id, input.name);
	if (holder) throw taken(holder);

	let id: string;
	try {
		id = db
			.insert(table.candidate)
			.values({
				id: randomId(),
				eventId: event.id,
				name: input.name,
				raDeg: input.raDeg,
				decDeg: input.decDeg,
				positionErrArcsec: input.positionErrArcsec ?? null,
				discoveredAt,
				magnitude: input.magnitude,
				magnitudeErr: input.magnitudeErr ?? null,
				filter: input.filter,
				telescopeId: scope?.id ?? null,
				teamId,
				reportedByUserId: reporter.user?.id ?? null,
				reportedByTokenId: reporter.user ? null : reporter.tokenId,
				notes: input.notes?.trim() ?? '',
				createdAt: now
			})
			.returning({ id: table.candidate.id })
			.get().id;
	} catch (e) {
		// Two reports of one name at once: the unique index decides, the loser hears who won.
		if (uniqueViolation(e)) throw taken(holderOfName(event.id, input.name));
		throw e;
	}
	const row = candidateRows(eq(table.candidate.id, id))[0];
	const nearest = row.near[0];
	const warning = nearest
		? `${row.name} lies ${nearest.separationArcsec.toFixed(2)}″ from ${nearest.name} (${nearest.teamName}), reported earlier: possibly the same transient.`
		: null;

	const actor: Actor = reporter.user ? actorOf(reporter.user) : { userId: null, label: `telescope ${scope?.name ?? reporter.telescopeId}` };
	record(actor, 'candidate.reported', `event:${event.id}`, {
		candidateId: row.id,
		eventId: event.id,
		name: row.name,
		raDeg: row.raDeg,
		decDeg: row.decDeg,
		positionErrArcsec: row.positionErrArcsec,
		magnitude: row.magnitude,
		filter: row.filter,
		teamId: row.teamId,
		telescopeId: row.telescopeId,
		discoveredAt: row.discoveredAt,
		nearCandidateIds: row.near.map((n) => n.id)
	});
	return { candidate: row, warning };
}

function candidateRows(where: SQL | undefined, limit?: number): CandidateRow[] {
	const base = db
		.select({
			c: table.candidate,
			teamName: table.team.name,
			telescopeName: table.telescope.name,
			userName: table.user.name,
			tokenTelescope: sql<string | null>`(SELECT t.name FROM api_token k JOIN telescope t ON t.id = k.telescope_id WHERE k.id = ${table.candidate.reportedByTokenId})`
		})
		.from(table.candidate)
		.innerJoin(table.team, eq(table.team.id, table.candidate.teamId))
		.leftJoin(table.telescope, eq(table.telescope.id, table.candidate.telescopeId))
		.leftJoin(table.user, eq(table.user.id, table.candidate.reportedByUserId))
		.where(where)
		.orderBy(desc(table.candidate.createdAt), desc(sql`${table.candidate}.rowid`));
	const rows = limit ? base.limit(limit).all() : base.all();
	return rows.map(({ c, teamName, telescopeName, userName, tokenTelescope }) => ({
		id: c.id,
		eventId: c.eventId,
		name: c.name,
		raDeg: c.raDeg,
		decDeg: c.decDeg,
		positionErrArcsec: c.positionErrArcsec,
		discoveredAt: c.discoveredAt.toISOString(),
		magnitude: c.magnitude,
		magnitudeErr: c.magnitudeErr,
		filter: c.filter,
		telescopeId: c.telescopeId,
		telescopeName,
		teamId: c.teamId,
		teamName,
		reportedBy: userName ?? (tokenTelescope ? `telescope ${tokenTelescope}` : c.reportedByTokenId ? 'a telescope token' : '—'),
		notes: c.notes,
		classification: c.classification,
		state: c.state,
		createdAt: c.createdAt.toISOString(),
		near: nearTo(c.eventId, c.raDeg, c.decDeg, c.id)
	}));
}

/** One event's candidates with team and telescope names, newest report first. */
export function listCandidates(eventId: string): CandidateRow[] {
	return candidateRows(eq(table.candidate.eventId, eventId));
}

export interface EventCandidateCount {
	eventId: string;
	sourceEventId: string;
	state: table.GwEvent['state'];
	count: number;
	latestAt: string;
}

/**
 * Every event's candidates, newest report first (at most `limit`), each with its event's
 * source id, and per event the number of candidates and the time of the latest report.
 */
export function listAllCandidates(limit = 500): { candidates: (CandidateRow & { sourceEventId: string })[]; events: EventCandidateCount[] } {
	const events = db
		.select({
			eventId: table.gwEvent.id,
			sourceEventId: table.gwEvent.sourceEventId,
			state: table.gwEvent.state,
			count: sql<number>`count(*)`,
			latestAt: sql<number>`max(${table.candidate.createdAt})`
		})
		.from(table.candidate)
		.innerJoin(table.gwEvent, eq(table.gwEvent.id, table.candidate.eventId))
		.groupBy(table.gwEvent.id)
		.orderBy(desc(sql`max(${table.candidate.createdAt})`))
		.all()
		.map((e) => ({ ...e, latestAt: new Date(e.latestAt).toISOString() }));
	const sourceOf = new Map(events.map((e) => [e.eventId, e.sourceEventId]));
	const candidates = candidateRows(undefined, limit).map((c) => ({ ...c, sourceEventId: sourceOf.get(c.eventId) ?? c.eventId }));
	return { candidates, events };
}

/** A candidate and its event, for the work that follows the report (photometry, spectra, classification, decisions). */
export interface CandidateInWork {
	candidate: table.Candidate;
	event: table.GwEvent;
}

/**
 * The candidate a change is about, refused as CandidateError: 404 when there is no such candidate,
 * 409 `event_retracted` when its event was retracted (`doing` completes the sentence, e.g.
 * "photometry is not taken"), so that no effort goes to a false alert.
 */
export function candidateForWork(candidateId: string, doing: string): CandidateInWork {
	const found = db
		.select({ candidate: table.candidate, event: table.gwEvent })
		.from(table.candidate)
		.innerJoin(table.gwEvent, eq(table.gwEvent.id, table.candidate.eventId))
		.where(eq(table.candidate.id, candidateId))
		.get();
	if (!found) throw new CandidateError(404, 'not_found', `No candidate ${candidateId || '(none given)'}.`);
	if (found.event.state === 'retracted')
		throw new CandidateError(
			409,
			'event_retracted',
			`Event ${found.event.sourceEventId} was retracted by its source; ${doing} for its candidates, so that no telescope time goes to a false alert.`
		);
	return found;
}

/** The actor a log entry names: the person, or the telescope behind a token. */
export function actorOfReporter(reporter: CandidateReporter): Actor {
	if (reporter.user) return actorOf(reporter.user);
	const name = db.select({ name: table.telescope.name }).from(table.telescope).where(eq(table.telescope.id, reporter.telescopeId)).get()?.name;
	return { userId: null, label: `telescope ${name ?? reporter.telescopeId}` };
}

/** One candidate as pages show it, or null. */
export function candidateRow(candidateId: string): CandidateRow | null {
	return candidateRows(eq(table.candidate.id, candidateId))[0] ?? null;
}

/** The candidate of an event by name (case-insensitive), or null. */
export function candidateIdByName(eventId: string, name: string): string | null {
	return (
		db
			.select({ id: table.candidate.id })
			.from(table.candidate)
			.where(and(eq(table.candidate.eventId, eventId), sql`lower(${table.candidate.name}) = lower(${name})`))
			.get()?.id ?? null
	);
}
