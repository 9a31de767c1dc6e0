/**
 * Claims: a team promises to observe one target of an event with one of its telescopes.
 *
 * The database decides who gets a contested target: a partial unique index on
 * (event, target kind, target, filter, epoch) over the open states ('claimed', 'observing')
 * makes the second of two simultaneous inserts fail, whatever the number of server processes.
 * States: claimed → observing → done, or released, or lapsed (not started in time).
 */
import { and, asc, eq, inArray, lt } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId, type SessionUser } from '../people/auth';
import { actorOf, onRecorded, record, SYSTEM, type Actor } from '../platform/realtime';
import { every } from '../platform/periodic';
import { restartService } from '../platform/services';
import type { ClaimFields } from '../../live-messages.ts';
import { eventClassOf, notify } from '../people/notifications';
import { sunAvoidance } from '../../targeting/sun-moon.ts';
import { DomainError } from '../platform/errors';
import { actsForEveryTeam, mayUseTeam, mayUseTelescope } from '../people/scope';
import { LAPSE_MINUTES_MAX, LAPSE_MINUTES_MIN } from '../../limits.ts';
import { config } from '../platform/config';
import { assertEventOpen } from '../alerts/events';

export const DEFAULT_LAPSE_MINUTES = 60;
export const LAPSE_CHECK_MS = 30_000;

export class ClaimError extends DomainError {}

/** The target is held by someone else; names the holder so the loser knows whom to talk to. */
export class ClaimTaken extends ClaimError {
	constructor(
		message: string,
		readonly holder: { claimId: string; teamName: string; telescopeName: string; state: string }
	) {
		super(409, 'taken', message);
	}
}

export interface ClaimInput {
	eventId: string;
	targetKind: table.Claim['targetKind'];
	targetId: string;
	filter?: string;
	epoch?: number;
	telescopeId: string;
	note?: string;
}

const isCoordinator = (user: SessionUser) => actsForEveryTeam(user);

function uniqueViolation(e: unknown): boolean {
	for (let c: unknown = e; c && typeof c === 'object'; c = (c as { cause?: unknown }).cause) {
		if ((c as { code?: unknown }).code === 'SQLITE_CONSTRAINT_UNIQUE') return true;
		if ((c as { cause?: unknown }).cause === c) break;
	}
	return false;
}

function openEvent(eventId: string): table.GwEvent {
	const event = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!event) throw new ClaimError(404, 'not_found', `No event ${eventId}.`);
	assertEventOpen(event, 'its targets are no longer claimed');
	if (event.state !== 'active') throw new ClaimError(409, 'event_' + event.state, `Event ${eventId} is ${event.state}; its targets cannot be claimed.`);
	return event;
}

function telescopeOf(telescopeId: string): table.Telescope {
	const t = db.select().from(table.telescope).where(eq(table.telescope.id, telescopeId)).get();
	if (!t) throw new ClaimError(404, 'not_found', `No telescope ${telescopeId}.`);
	return t;
}

/**
 * Galaxy targets must be catalogue rows; field targets must be among the event's ranked fields.
 * Returns where the target is and what to call it.
 */
function checkTarget(eventId: string, kind: table.Claim['targetKind'], targetId: string): { raDeg: number; decDeg: number; name: string } {
	if (kind === 'galaxy') {
		const id = Number(targetId);
		const found = Number.isSafeInteger(id) && db.select({ raDeg: table.galaxy.raDeg, decDeg: table.galaxy.decDeg, name: table.galaxy.name }).from(table.galaxy).where(eq(table.galaxy.id, id)).get();
		if (!found) throw new ClaimError(404, 'unknown_target', `No galaxy ${targetId} in the catalogues.`);
		return found;
	}
	const f = db
		.select({ raDeg: table.eventField.raDeg, decDeg: table.eventField.decDeg, name: table.eventField.fieldId })
		.from(table.eventField)
		.where(and(eq(table.eventField.eventId, eventId), eq(table.eventField.fieldId, targetId)))
		.get();
	if (!f) throw new ClaimError(404, 'unknown_target', `Field ${targetId} is not among event ${eventId}'s ranked fields.`);
	return f;
}

/**
 * A telescope may not promise a target inside its own Sun-avoidance limit (the telescope's
 * min_sun_separation_deg; solar elongation now, from sun-moon.ts). The observatory's own rules
 * still decide at the telescope: this only stops the network from planning on such a target.
 */
function checkSun(target: { raDeg: number; decDeg: number; name: string }, scope: table.Telescope, now: Date): void {
	const v = sunAvoidance(target, now, scope.minSunSeparationDeg);
	if (!v.ok)
		throw new ClaimError(
			422,
			'sun_avoidance',
			`${target.name} is ${v.elongationDeg.toFixed(1)}° from the Sun, inside ${scope.name}'s ${scope.minSunSeparationDeg}° Sun-avoidance limit: it cannot be claimed with this telescope. Follow the observatory's own Sun rules.`
		);
}

function holderOf(input: { eventId: string; targetKind: string; targetId: string; filter: string; epoch: number }) {
	return db
		.select({ claimId: table.claim.id, state: table.claim.state, teamName: table.team.name, telescopeName: table.telescope.name })
		.from(table.claim)
		.innerJoin(table.team, eq(table.team.id, table.claim.teamId))
		.innerJoin(table.telescope, eq(table.telescope.id, table.claim.telescopeId))
		.where(
			and(
				eq(table.claim.eventId, input.eventId),
				eq(table.claim.targetKind, input.targetKind as table.Claim['targetKind']),
				eq(table.claim.targetId, input.targetId),
				eq(table.claim.filter, input.filter),
				eq(table.claim.epoch, input.epoch),
				inArray(table.claim.state, [...table.OPEN_CLAIM_STATES])
			)
		)
		.get();
}

function payloadOf(c: table.Claim): ClaimFields {
	return {
		claimId: c.id,
		eventId: c.eventId,
		targetKind: c.targetKind,
		targetId: c.targetId,
		filter: c.filter,
		epoch: c.epoch,
		telescopeId: c.telescopeId,
		teamId: c.teamId,
		userId: c.userId,
		state: c.state
	};
}

/**
 * Claim a target for one of the user's team's telescopes (coordinators: any telescope).
 * Throws ClaimTaken (409) when another claim holds the same target, filter and epoch.
 */
export function claim(user: SessionUser, input: ClaimInput, now = new Date()): table.Claim {
	const filter = input.filter ?? '';
	const epoch = input.epoch ?? 1;
	if (!Number.isInteger(epoch) || epoch < 1) throw new ClaimError(422, 'invalid', 'Epoch must be a whole number from 1 up.');
	const scope = telescopeOf(input.telescopeId);
	if (!mayUseTelescope(user, scope))
		throw new ClaimError(403, 'forbidden', `Telescope ${scope.name} belongs to a team you are not a member of.`);
	if (filter !== '' && !scope.filters.includes(filter))
		throw new ClaimError(422, 'invalid', `Telescope ${scope.name} has no filter "${filter}" (filters are case-sensitive: ${scope.filters.join(', ')}).`);
	const key = { eventId: input.eventId, targetKind: input.targetKind, targetId: input.targetId, filter, epoch };
	let row: table.Claim;
	// What the targets table calls it: the galaxy's name, the field's label.
	let targetName = `${input.targetKind} ${input.targetId}`;
	try {
		row = db.transaction((tx) => {
			openEvent(input.eventId);
			const target = checkTarget(input.eventId, input.targetKind, input.targetId);
			targetName = input.targetKind === 'galaxy' ? target.name : `field ${target.name}`;
			checkSun(target, scope, now);
			return tx
				.insert(table.claim)
				.values({ id: randomId(), ...key, telescopeId: scope.id, teamId: scope.teamId, userId: user.id, state: 'claimed', claimedAt: now, note: input.note ?? '' })
				.returning()
				.get();
		});
	} catch (e) {
		if (!uniqueViolation(e)) throw e;
		const holder = holderOf(key);
		const who = holder ? `${holder.teamName} (${holder.telescopeName})` : 'another team';
		throw new ClaimTaken(
			`Already taken by ${who}${holder ? `, ${holder.state}` : ''}: ${targetName}${filter ? ` in ${filter}` : ''}${epoch > 1 ? `, epoch ${epoch}` : ''}.`,
			holder ?? { claimId: '', teamName: '', telescopeName: '', state: '' }
		);
	}
	record(actorOf(user), 'claim.claimed', `event:${row.eventId}`, payloadOf(row));
	return row;
}

export function getClaim(claimId: string): table.Claim | undefined {
	return db.select().from(table.claim).where(eq(table.claim.id, claimId)).get();
}

function loadFor(user: SessionUser, claimId: string): table.Claim {
	const c = getClaim(claimId);
	if (!c) throw new ClaimError(404, 'not_found', `No claim ${claimId}.`);
	if (!mayUseTeam(user, c.teamId)) throw new ClaimError(403, 'forbidden', 'Only the claiming team or a coordinator may change this claim.');
	return c;
}

/** Move a claim from one of `from` to `to`, guarded on the state read so a racing change loses cleanly. */
function transition(
	actor: Actor,
	c: table.Claim,
	from: readonly table.ClaimState[],
	to: 'observing' | 'done' | 'released',
	set: Partial<table.Claim>,
	extra: { reason?: string } = {}
): table.Claim {
	if (!from.includes(c.state)) throw new ClaimError(409, 'bad_state', `The claim is ${c.state}; it cannot become ${to}.`);
	const updated = db
		.update(table.claim)
		.set({ ...set, state: to })
		.where(and(eq(table.claim.id, c.id), eq(table.claim.state, c.state)))
		.returning()
		.get();
	if (!updated) throw new ClaimError(409, 'bad_state', 'The claim changed meanwhile; reload and try again.');
	record(actor, `claim.${to}` as const, `event:${c.eventId}`, { ...payloadOf(updated), from: c.state, ...extra });
	return updated;
}

export function start(user: SessionUser, claimId: string, now = new Date()): table.Claim {
	return transition(actorOf(user), loadFor(user, claimId), ['claimed'], 'observing', { startedAt: now });
}

export function complete(user: SessionUser, claimId: string, now = new Date()): table.Claim {
	return transition(actorOf(user), loadFor(user, claimId), ['claimed', 'observing'], 'done', { doneAt: now });
}

export function release(user: SessionUser, claimId: string, reason = '', now = new Date()): table.Claim {
	const c = loadFor(user, claimId);
	return transition(actorOf(user), c, ['claimed', 'observing'], 'released', { endedAt: now, note: reason || c.note }, { reason });
}

/**
 * Coordinators hand an open claim to another telescope (and its team). The claim keeps its
 * target and state; the unique index is unaffected since the target does not change.
 */
export function reassign(user: SessionUser, claimId: string, telescopeId: string, now = new Date()): table.Claim {
	if (!isCoordinator(user)) throw new ClaimError(403, 'forbidden', 'Only a coordinator may reassign a claim.');
	const c = loadFor(user, claimId);
	if (!(table.OPEN_CLAIM_STATES as readonly string[]).includes(c.state)) throw new ClaimError(409, 'bad_state', `The claim is ${c.state}; only open claims can be reassigned.`);
	const t = telescopeOf(telescopeId);
	checkSun(checkTarget(c.eventId, c.targetKind, c.targetId), t, now);
	const updated = db
		.update(table.claim)
		.set({ telescopeId: t.id, teamId: t.teamId })
		.where(and(eq(table.claim.id, c.id), eq(table.claim.state, c.state)))
		.returning()
		.get();
	if (!updated) throw new ClaimError(409, 'bad_state', 'The claim changed meanwhile; reload and try again.');
	record(actorOf(user), 'claim.reassigned', `event:${c.eventId}`, { ...payloadOf(updated), fromTelescopeId: c.telescopeId, fromTeamId: c.teamId });
	return updated;
}

/** Lapse time for an event: its own setting, else the global one, else the default. */
export function lapseMinutesFor(eventId: string): number {
	const rows = db
		.select()
		.from(table.claimSetting)
		.where(inArray(table.claimSetting.scope, [eventId, 'global']))
		.all();
	return (rows.find((r) => r.scope === eventId) ?? rows.find((r) => r.scope === 'global'))?.lapseMinutes ?? DEFAULT_LAPSE_MINUTES;
}

/** Coordinators set the lapse time globally (`scope` = 'global') or for one event. */
export function setLapseMinutes(user: SessionUser, scope: string, minutes: number, now = new Date()): void {
	if (!isCoordinator(user)) throw new ClaimError(403, 'forbidden', 'Only a coordinator may set the lapse time.');
	if (!(Number.isInteger(minutes) && minutes >= LAPSE_MINUTES_MIN && minutes <= LAPSE_MINUTES_MAX))
		throw new ClaimError(422, 'invalid', `Enter whole minutes from ${LAPSE_MINUTES_MIN} to ${LAPSE_MINUTES_MAX} (24 h).`);
	db.insert(table.claimSetting)
		.values({ scope, lapseMinutes: minutes, updatedBy: user.id, updatedAt: now })
		.onConflictDoUpdate({ target: table.claimSetting.scope, set: { lapseMinutes: minutes, updatedBy: user.id, updatedAt: now } })
		.run();
	record(actorOf(user), 'claim.settings', scope === 'global' ? 'board' : `event:${scope}`, { scope, lapseMinutes: minutes });
}

/**
 * Free claims still 'claimed' (never started) after their event's lapse time, and tell the
 * claiming team's members by e-mail. Returns the lapsed claims.
 */
export async function lapseOverdue(now = new Date()): Promise<table.Claim[]> {
	const waiting = db
		.select()
		.from(table.claim)
		.where(and(eq(table.claim.state, 'claimed'), lt(table.claim.claimedAt, now)))
		.orderBy(asc(table.claim.claimedAt))
		.all();
	const lapsed: table.Claim[] = [];
	const minutesByEvent = new Map<string, number>();
	for (const c of waiting) {
		let minutes = minutesByEvent.get(c.eventId);
		if (minutes === undefined) minutesByEvent.set(c.eventId, (minutes = lapseMinutesFor(c.eventId)));
		if (now.getTime() - c.claimedAt.getTime() < minutes * 60_000) continue;
		const updated = db
			.update(table.claim)
			.set({ state: 'lapsed', endedAt: now })
			.where(and(eq(table.claim.id, c.id), eq(table.claim.state, 'claimed')))
			.returning()
			.get();
		if (!updated) continue;
		lapsed.push(updated);
		record(SYSTEM, 'claim.lapsed', `event:${c.eventId}`, { ...payloadOf(updated), from: 'claimed', lapseMinutes: minutes });
		await tellTeam(updated, minutes);
	}
	return lapsed;
}

async function tellTeam(c: table.Claim, minutes: number): Promise<void> {
	const info = db
		.select({ teamName: table.team.name, telescopeName: table.telescope.name })
		.from(table.team)
		.innerJoin(table.telescope, eq(table.telescope.id, c.telescopeId))
		.where(eq(table.team.id, c.teamId))
		.get();
	const members = db
		.select({ userId: table.user.id, name: table.user.name, email: table.user.email, disabledAt: table.user.disabledAt })
		.from(table.teamMember)
		.innerJoin(table.user, eq(table.user.id, table.teamMember.userId))
		.where(eq(table.teamMember.teamId, c.teamId))
		.all()
		.filter((m) => !m.disabledAt);
	const subject = `Claim lapsed: ${c.targetKind} ${c.targetId} (event ${c.eventId})`;
	const text = [
		`The claim of ${info?.teamName ?? 'your team'} with ${info?.telescopeName ?? c.telescopeId} on ${c.targetKind} ${c.targetId}` +
			`${c.filter ? ` in ${c.filter}` : ''}, epoch ${c.epoch}, for event ${c.eventId} was not started within ${minutes} minutes.`,
		'The target is free again; claim it anew if you still intend to observe it.'
	].join('\n\n');
	const eventClass = eventClassOf(db.select({ c: table.gwEvent.classification }).from(table.gwEvent).where(eq(table.gwEvent.id, c.eventId)).get()?.c);
	for (const m of members) {
		try {
			await notify(m, 'claim.lapsed', eventClass, { subject, text });
		} catch (e) {
			console.error(`lapse notice to ${m.email} failed`, e);
		}
	}
}

/** A retraction releases every open claim of the event, with the reason logged; returns the claims freed. */
export function releaseForRetraction(eventId: string, actor: Actor = SYSTEM, now = new Date()): table.Claim[] {
	return releaseOpenClaims(eventId, 'event retracted', actor, now);
}

/**
 * Release every open claim of an event (a retraction, a coordinator closing it), each logged as
 * `claim.released` with `reason`; returns the claims freed.
 */
export function releaseOpenClaims(eventId: string, reason: string, actor: Actor = SYSTEM, now = new Date()): table.Claim[] {
	const released = db
		.update(table.claim)
		.set({ state: 'released', endedAt: now, note: reason })
		.where(and(eq(table.claim.eventId, eventId), inArray(table.claim.state, [...table.OPEN_CLAIM_STATES])))
		.returning()
		.all();
	for (const c of released) record(actor, 'claim.released', `event:${eventId}`, { ...payloadOf(c), reason });
	return released;
}

/** As `releaseForRetraction`, counting. */
export function cancelOpenClaims(eventId: string, actor: Actor = SYSTEM, now = new Date()): number {
	return releaseForRetraction(eventId, actor, now).length;
}

/**
 * Tell the members of every team whose claims a retraction freed, one e-mail per person listing
 * their teams' targets, so that nobody points a telescope at them on the strength of the claim.
 * Returns the addresses written to.
 */
export async function tellRetractedClaims(eventId: string, claimIds: string[], reason: string | null): Promise<string[]> {
	if (!claimIds.length) return [];
	const event = db
		.select({ sourceEventId: table.gwEvent.sourceEventId, classification: table.gwEvent.classification })
		.from(table.gwEvent)
		.where(eq(table.gwEvent.id, eventId))
		.get();
	const freed = db
		.select({ c: table.claim, teamName: table.team.name, telescopeName: table.telescope.name })
		.from(table.claim)
		.innerJoin(table.team, eq(table.team.id, table.claim.teamId))
		.innerJoin(table.telescope, eq(table.telescope.id, table.claim.telescopeId))
		.where(and(eq(table.claim.eventId, eventId), inArray(table.claim.id, claimIds)))
		.orderBy(asc(table.team.name), asc(table.claim.claimedAt))
		.all();
	const teamIds = [...new Set(freed.map((f) => f.c.teamId))];
	const members = db
		.select({ teamId: table.teamMember.teamId, userId: table.user.id, email: table.user.email, name: table.user.name, disabledAt: table.user.disabledAt })
		.from(table.teamMember)
		.innerJoin(table.user, eq(table.user.id, table.teamMember.userId))
		.where(inArray(table.teamMember.teamId, teamIds))
		.all()
		.filter((m) => !m.disabledAt);
	const byPerson = new Map<string, { userId: string; name: string; teamIds: Set<string> }>();
	for (const m of members) {
		const p = byPerson.get(m.email) ?? { userId: m.userId, name: m.name, teamIds: new Set<string>() };
		p.teamIds.add(m.teamId);
		byPerson.set(m.email, p);
	}
	const source = event?.sourceEventId ?? eventId;
	const sent: string[] = [];
	for (const [email, person] of byPerson) {
		const theirs = freed.filter((f) => person.teamIds.has(f.c.teamId));
		const text = [
			`${person.name},`,
			'',
			`The source has retracted ${source}${reason ? `, giving this reason: "${reason}"` : ' (no reason was given)'}.`,
			`These claims of your team${person.teamIds.size === 1 ? '' : 's'} were released, so they no longer hold the targets:`,
			'',
			...theirs.map((f) => `  - ${f.c.targetKind} ${f.c.targetId}${f.c.filter ? ` in ${f.c.filter}` : ''}, epoch ${f.c.epoch} (${f.teamName}, ${f.telescopeName})`),
			'',
			'Stop follow-up observations for this event. Your observatory’s own rules still decide what happens at the telescope.',
			'',
			`${config.publicUrl}/events/${encodeURIComponent(eventId)}`
		].join('\n');
		try {
			const delivery = await notify({ userId: person.userId, name: person.name, email }, 'claims.retracted', eventClassOf(event?.classification), {
				subject: `RETRACTED ${source} · your claims were released`,
				text
			});
			if (delivery !== 'none') sent.push(email);
		} catch (e) {
			console.error(`retraction notice to ${email} failed`, e);
		}
	}
	return sent;
}

export interface ClaimView extends table.Claim {
	teamName: string;
	telescopeName: string;
	userName: string | null;
}

export function listClaims(eventId: string, o: { openOnly?: boolean } = {}): ClaimView[] {
	const rows = db
		.select({ c: table.claim, teamName: table.team.name, telescopeName: table.telescope.name, userName: table.user.name })
		.from(table.claim)
		.innerJoin(table.team, eq(table.team.id, table.claim.teamId))
		.innerJoin(table.telescope, eq(table.telescope.id, table.claim.telescopeId))
		.leftJoin(table.user, eq(table.user.id, table.claim.userId))
		.where(o.openOnly ? and(eq(table.claim.eventId, eventId), inArray(table.claim.state, [...table.OPEN_CLAIM_STATES])) : eq(table.claim.eventId, eventId))
		.orderBy(asc(table.claim.claimedAt))
		.all();
	return rows.map((r) => ({ ...r.c, teamName: r.teamName, telescopeName: r.telescopeName, userName: r.userName }));
}

/**
 * Start the periodic lapse check (null: none), and the release of a retracted event's claims with
 * the e-mails to the teams that held them. Installing twice replaces the first.
 */
export function installClaims(o: { everyMs?: number | null } = {}): () => void {
	const everyMs = o.everyMs === undefined ? LAPSE_CHECK_MS : o.everyMs;
	return restartService('claim-lapse', () => {
		const stop = everyMs === null ? null : every(everyMs, () => lapseOverdue(), 'claim lapse check');
		// Logged to the board and the event's room: react to the board copy only.
		// A retraction releases the event's open claims (each logged) and tells their teams; reacting
		// to the board copy only, as the retraction is logged to the event's room too.
		const off = onRecorded('event.retracted', ({ eventId, reason }, m) => {
			if (m.room !== 'board') return;
			const freed = releaseForRetraction(eventId, SYSTEM);
			tellRetractedClaims(eventId, freed.map((c) => c.id), reason).catch((e) => console.error(`retraction notices for ${eventId} failed`, e));
		});
		return {
			stop() {
				stop?.();
				off();
			}
		};
	});
}
