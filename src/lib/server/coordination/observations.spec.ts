import { beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { loadSessionUser, validateApiToken, type SessionUser } from '../people/auth';
import { issueToken, revokeToken } from '../people/tokens';
import { SYSTEM } from '../platform/realtime';
import * as claims from './claims';
import { ObservationError, parseObservationCsv, report, reportMany, type ObservationInput } from './observations';

let n = 0;
const NOW = new Date('2026-12-02T03:00:00Z');
const EVENT_TIME = new Date('2026-12-02T00:00:00Z');

beforeEach(() => {
	createTestDatabase();
});

function world() {
	const teamId = `team-${++n}`;
	db.insert(table.team).values({ id: teamId, name: `Robot Ridge ${n} (test)`, region: 'Test' }).run();
	const otherTeam = `team-${++n}`;
	db.insert(table.team).values({ id: otherTeam, name: `Other Vale ${n} (test)`, region: 'Test' }).run();
	const telescopeId = `tel-${++n}`;
	const base = {
		siteName: 'Test site',
		latitudeDeg: -30,
		longitudeDeg: -70,
		elevationM: 2000,
		apertureM: 0.6,
		filters: ['g', 'r'],
		limitingMag: 20,
		limitingMagExposureS: 60
	};
	// A 1° × 1° rectangle: a galaxy 0.4° east of the centre along the equator is inside, 0.6° is not.
	db.insert(table.telescope).values({ id: telescopeId, teamId, name: `Robo ${n} (test)`, fovShape: 'rectangle', fovWidthDeg: 1, fovHeightDeg: 1, robotic: true, ...base }).run();
	const otherTel = `tel-${++n}`;
	db.insert(table.telescope).values({ id: otherTel, teamId: otherTeam, name: `Other ${n} (test)`, fovShape: 'circle', fovWidthDeg: 1, fovHeightDeg: 1, ...base }).run();
	const eventId = `ev-${++n}`;
	db.insert(table.gwEvent).values({ id: eventId, sourceEventId: `S-obs-${n}`, role: 'observation', state: 'active', eventTime: EVENT_TIME }).run();
	db.insert(table.catalog).values({ id: `cat-${n}`, name: `cat ${n}`, synthetic: true, columns: {}, state: 'ready' }).run();
	const gal = (raDeg: number, decDeg: number) =>
		String(
			db
				.insert(table.galaxy)
				.values({ catalogId: `cat-${n}`, row: 0, name: `G${raDeg}`, raDeg, decDeg, distanceMpc: 80, distanceErrMpc: 8, weight: 1, pixel: 0 })
				.returning()
				.get().id
		);
	const inside = gal(100.4, 0);
	const outside = gal(100.6, 0);
	const observerId = `user-${++n}`;
	db.insert(table.user).values({ id: observerId, email: `${observerId}@obs.test`, name: 'Olga Observer', passwordHash: 'unused' }).run();
	db.insert(table.userRole).values({ userId: observerId, role: 'observer' }).run();
	db.insert(table.teamMember).values({ teamId, userId: observerId }).run();
	const observer = loadSessionUser(observerId)!;
	return { teamId, telescopeId, otherTel, eventId, inside, outside, observer };
}

function claimBoth(w: ReturnType<typeof world>, observer: SessionUser) {
	const a = claims.claim(observer, { eventId: w.eventId, targetKind: 'galaxy', targetId: w.inside, telescopeId: w.telescopeId }, NOW);
	const b = claims.claim(observer, { eventId: w.eventId, targetKind: 'galaxy', targetId: w.outside, telescopeId: w.telescopeId }, NOW);
	return { a, b };
}

const pointing = (w: ReturnType<typeof world>, o: Partial<ObservationInput> = {}): ObservationInput => ({
	eventId: w.eventId,
	observedAt: '2026-12-02T02:30:00Z',
	raDeg: 100,
	decDeg: 0,
	filter: 'r',
	exposureS: 120,
	limitingMag: 20.5,
	seeingArcsec: 1.2,
	...o
});

describe('report', () => {
	it('a robotic telescope’s pointing completes the claims inside its footprint only', () => {
		const w = world();
		const { a, b } = claimBoth(w, w.observer);
		const token = issueToken(SYSTEM, { name: 'robot', telescopeId: w.telescopeId });
		const principal = validateApiToken(token.secret)!;
		expect(principal.telescopeId).toBe(w.telescopeId);
		const out = report({ user: null, telescopeId: principal.telescopeId!, tokenId: principal.tokenId }, pointing(w), 'api', NOW);
		expect(out.completedClaimIds).toEqual([a.id]);
		expect(claims.getClaim(a.id)?.state).toBe('done');
		expect(claims.getClaim(b.id)?.state).toBe('claimed');
		expect(out.observation).toMatchObject({ source: 'api', reportedByTokenId: token.id, reportedByUserId: null, claimId: a.id, teamId: w.teamId });
		const log = db.select().from(table.eventLog).where(eq(table.eventLog.action, 'observation.reported')).get();
		expect(log?.payload).toMatchObject({ observationId: out.observation.id, completedClaimIds: [a.id] });
		// A revoked token no longer resolves to the telescope.
		revokeToken(SYSTEM, token.id);
		expect(validateApiToken(token.secret)).toBeNull();
	});

	it('leaves a claim for another filter, and other telescopes’ claims, alone', () => {
		const w = world();
		const inG = claims.claim(w.observer, { eventId: w.eventId, targetKind: 'galaxy', targetId: w.inside, telescopeId: w.telescopeId, filter: 'g' }, NOW);
		const coord = loadSessionUser(
			db.insert(table.user).values({ id: `c-${++n}`, email: `c${n}@obs.test`, name: 'Cora', passwordHash: 'x' }).returning().get().id
		)!;
		db.insert(table.userRole).values({ userId: coord.id, role: 'coordinator' }).run();
		const other = claims.claim(loadSessionUser(coord.id)!, { eventId: w.eventId, targetKind: 'galaxy', targetId: w.inside, telescopeId: w.otherTel, filter: 'r' }, NOW);
		const out = report({ user: w.observer }, { ...pointing(w), telescopeId: w.telescopeId }, 'form', NOW);
		expect(out.completedClaimIds).toEqual([]);
		expect(claims.getClaim(inG.id)?.state).toBe('claimed');
		expect(claims.getClaim(other.id)?.state).toBe('claimed');
	});

	it('refuses a person reporting for another team’s telescope', () => {
		const w = world();
		expect(() => report({ user: w.observer }, { ...pointing(w), telescopeId: w.otherTel }, 'form', NOW)).toThrow(/not a member/);
	});

	it('answers bad input with one message per field', () => {
		const w = world();
		const robot = { user: null, telescopeId: w.telescopeId, tokenId: null };
		let err: ObservationError | null = null;
		try {
			report(robot, pointing(w, { observedAt: '2026-12-02T03:06:00Z', filter: 'R' }), 'api', NOW);
		} catch (e) {
			err = e as ObservationError;
		}
		expect(err).toBeInstanceOf(ObservationError);
		expect(err!.status).toBe(422);
		expect(err!.fields.observedAt).toMatch(/5 minutes in the future/);
		expect(err!.fields.filter).toMatch(/case-sensitive/);
		// Before the merger (00:00 UTC): refused with both times, in ISO UTC.
		expect(() => report(robot, pointing(w, { observedAt: '2026-11-30T23:00:00Z' }), 'api', NOW)).toThrow(
			'This pointing (2026-11-30T23:00:00Z) was taken before the merger at 2026-12-02T00:00:00Z; only pointings after the merger count.'
		);
		expect(() => report(robot, pointing(w, { raDeg: 360 }), 'api', NOW)).toThrow(/RA \(deg, J2000\) must be from 0/);
		expect(() => report(robot, pointing(w, { decDeg: -91 }), 'api', NOW)).toThrow(/Dec \(deg, J2000\) must be from −90 to 90/);
		expect(() => report(robot, pointing(w, { exposureS: 0 }), 'api', NOW)).toThrow(/Exposure \(s\) must be greater than 0/);
		expect(() => report(robot, pointing(w, { limitingMag: 31 }), 'api', NOW)).toThrow(/Limiting magnitude \(AB\) must be from 5 to 30/);
		expect(() => report(robot, pointing(w, { seeingArcsec: 25 }), 'api', NOW)).toThrow(/Seeing \(arcsec\) must be greater than 0/);
		expect(db.select().from(table.observation).all()).toHaveLength(0);
		// 4 minutes ahead is tolerated (clock skew).
		expect(report(robot, pointing(w, { observedAt: '2026-12-02T03:04:00Z' }), 'api', NOW).observation.source).toBe('api');
	});
});

describe('pointings that cannot be coverage', () => {
	it('refuses a pointing one second before the merger, by API, form or CSV, and takes one at the merger', async () => {
		const w = world();
		const robot = { user: null, telescopeId: w.telescopeId, tokenId: null };
		const before = '2026-12-01T23:59:59Z';
		for (const [who, source] of [[robot, 'api'], [{ user: w.observer }, 'form']] as const) {
			let err: ObservationError | null = null;
			try {
				report(who, { ...pointing(w, { observedAt: before }), telescopeId: w.telescopeId }, source, NOW);
			} catch (e) {
				err = e as ObservationError;
			}
			expect(err).toBeInstanceOf(ObservationError);
			expect(err!.status).toBe(422);
			expect(err!.fields.observedAt).toBe('This pointing (2026-12-01T23:59:59Z) was taken before the merger at 2026-12-02T00:00:00Z; only pointings after the merger count.');
		}
		const csv = await reportMany({ user: w.observer }, [pointing(w), pointing(w, { observedAt: before })].map((p) => ({ ...p, telescopeId: w.telescopeId })), 'csv', { lines: [2, 3], now: NOW });
		expect(csv.results).toEqual([]);
		expect(csv.errors).toEqual([{ line: 3, message: expect.stringContaining('before the merger at 2026-12-02T00:00:00Z') }]);
		expect(db.select().from(table.observation).all()).toHaveLength(0);
		expect(report(robot, pointing(w, { observedAt: '2026-12-02T00:00:00Z' }), 'api', NOW).observation.observedAt.toISOString()).toBe('2026-12-02T00:00:00.000Z');
	});

	it('refuses every pointing on a retracted event, saying so, and stores none', async () => {
		const w = world();
		db.update(table.gwEvent).set({ state: 'retracted', retractedAt: new Date('2026-12-02T01:00:00Z') }).where(eq(table.gwEvent.id, w.eventId)).run();
		const robot = { user: null, telescopeId: w.telescopeId, tokenId: null };
		let err: ObservationError | null = null;
		try {
			report(robot, pointing(w), 'api', NOW);
		} catch (e) {
			err = e as ObservationError;
		}
		expect(err).toMatchObject({ status: 409, code: 'event_retracted' });
		expect(err!.message).toMatch(/^S-obs-\d+ was retracted by the source \(2026-12-02T01:00:00Z\): observations are no longer recorded for it/);
		const csv = await reportMany({ user: w.observer }, [{ ...pointing(w), telescopeId: w.telescopeId }], 'csv', { now: NOW });
		expect(csv.errors[0].message).toMatch(/was retracted by the source/);
		expect(db.select().from(table.observation).all()).toHaveLength(0);
	});

	it('without a merger time, keeps the one-day window before the event arrived', () => {
		const w = world();
		db.update(table.gwEvent).set({ eventTime: null, createdAt: new Date('2026-12-02T00:00:00Z') }).where(eq(table.gwEvent.id, w.eventId)).run();
		const robot = { user: null, telescopeId: w.telescopeId, tokenId: null };
		expect(() => report(robot, pointing(w, { observedAt: '2026-11-30T23:00:00Z' }), 'api', NOW)).toThrow(/more than 1 day before the event arrived/);
		expect(report(robot, pointing(w, { observedAt: '2026-12-01T12:00:00Z' }), 'api', NOW).observation.source).toBe('api');
	});
});

describe('reportMany (CSV upload)', () => {
	it('stores nothing when one row is refused, naming its CSV line; stores all rows otherwise', async () => {
		const w = world();
		const { a, b } = claimBoth(w, w.observer);
		const csv = await parseObservationCsv(
			'observed_at,ra_deg,dec_deg,filter,exposure_s,limiting_mag\n2026-12-02T02:00:00Z,100,0,r,60,20\n\n2026-12-02T02:10:00Z,100.6,0,i,60,20\n'
		);
		expect(csv.lines).toEqual([2, 4]);
		const me = { user: w.observer };
		const rows = csv.rows.map((r) => ({ ...r, eventId: w.eventId, telescopeId: w.telescopeId }));
		const refused = await reportMany(me, rows, 'csv', { lines: csv.lines, now: NOW });
		expect(refused.results).toEqual([]);
		expect(refused.errors).toEqual([{ line: 4, message: expect.stringMatching(/filter "i" is not one of/) }]);
		expect(db.select().from(table.observation).all()).toHaveLength(0);
		expect(claims.getClaim(a.id)?.state).toBe('claimed');
		expect(claims.getClaim(b.id)?.state).toBe('claimed');
		rows[1].filter = 'g';
		const stored = await reportMany(me, rows, 'csv', { lines: csv.lines, now: NOW });
		expect(stored.errors).toEqual([]);
		// Row 1 points at 100°: galaxy a (100.4°) inside; row 2 at 100.6°: galaxy b at its centre.
		expect(stored.results.map((r) => r.completedClaimIds)).toEqual([[a.id], [b.id]]);
		expect(db.select().from(table.observation).all().map((o) => o.source)).toEqual(['csv', 'csv']);
	});
});

describe('parseObservationCsv', () => {
	const header = 'observed_at,ra_deg,dec_deg,filter,exposure_s,limiting_mag,seeing_arcsec,notes';
	it('reads rows, with quoted notes', async () => {
		const out = await parseObservationCsv(`${header}\n2026-12-02T02:00:00Z,100,0,r,60,20.1,1.1,"clear, steady"\n2026-12-02T02:05:00Z,101.5,-0.5,g,90,20.4,,\n`);
		expect(out.errors).toEqual([]);
		expect(out.rows).toHaveLength(2);
		expect(out.rows[0]).toMatchObject({ raDeg: 100, decDeg: 0, filter: 'r', exposureS: 60, limitingMag: 20.1, seeingArcsec: 1.1, notes: 'clear, steady' });
		expect(out.rows[1].seeingArcsec).toBeUndefined();
	});
	it('is all or nothing, with line numbers', async () => {
		const out = await parseObservationCsv(
			`${header}\n2026-12-02T02:00:00Z,100,0,r,60,20.1,1.1,ok\n2026-12-02T02:00:00Z,400,0,r,60,20.1,1.1,bad ra\nnot-a-time,100,0,r,-1,20.1,1.1,two bad\n2026-12-02T02:00:00Z,100,0,r`
		);
		expect(out.rows).toEqual([]);
		expect(out.errors.map((e) => e.line)).toEqual([3, 4, 4, 5]);
		expect(out.errors[0].message).toMatch(/^RA \(deg, J2000\) must be from 0/);
		expect(out.errors[1].message).toMatch(/^Time \(UTC\) must be an ISO 8601 time/);
		expect(out.errors[2].message).toMatch(/^Exposure \(s\) must be greater than 0/);
		expect(out.errors[3].message).toMatch(/4 cells, header has 8/);
	});
	it('names missing and unknown columns on line 1', async () => {
		const out = await parseObservationCsv('observed_at,ra_deg,dec_deg,filtre,exposure_s,limiting_mag\n');
		expect(out.errors).toEqual([
			{ line: 1, message: expect.stringContaining('unknown column "filtre"') },
			{ line: 1, message: 'missing column "filter"' }
		]);
	});
});

describe('parseObservationCsv: quoting read by csv-parse', () => {
	const header = 'observed_at,ra_deg,dec_deg,filter,exposure_s,limiting_mag,seeing_arcsec,notes';
	it('keeps line numbers after a note spanning two lines, and names the line of a quote left open', async () => {
		expect.hasAssertions();
		const ok = await parseObservationCsv(`${header}\r\n2026-12-02T02:00:00Z,100,0,r,60,20.1,1.1,"cloud at first,\r\nthen clear"\r\n\r\n2026-12-02T02:05:00Z,101.5,-0.5,g,90,20.4,,\r\n`);
		expect(ok.errors).toEqual([]);
		expect(ok.lines).toEqual([2, 5]);
		expect(ok.rows[0].notes).toBe('cloud at first,\r\nthen clear');
		const open = await parseObservationCsv(`${header}\n2026-12-02T02:00:00Z,100,0,r,60,20.1,1.1,ok\n2026-12-02T02:00:00Z,100,0,r,60,20.1,1.1,"open\n2026-12-02T02:00:00Z,100,0,r,60,20.1,1.1,ok\n`);
		expect(open.errors).toEqual([{ line: 3, message: 'unterminated quote' }]);
	});
});
