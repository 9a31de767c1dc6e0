import { readFileSync } from 'node:fs';
import { beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { loadSessionUser, validateApiToken, type SessionUser } from '../people/auth';
import { issueToken } from '../people/tokens';
import { onRecorded, SYSTEM, type LiveMessage } from '../platform/realtime';
import { POSITION_ERR_ARCSEC_MAX } from '../../limits';
import {
	angularSeparationDeg,
	CandidateError,
	listAllCandidates,
	listCandidates,
	NEAR_ARCSEC,
	reportCandidate,
	type CandidateInput,
	type CandidateReporter
} from './candidates';

const NOW = new Date('2026-12-02T03:00:00Z');
const MERGER = new Date('2026-12-02T00:00:00Z');
const ARCSEC = 1 / 3600;
let n = 0;

beforeEach(() => {
	createTestDatabase();
});

function person(name: string, roles: table.Role[], teamIds: string[]): SessionUser {
	const id = `user-${++n}`;
	db.insert(table.user).values({ id, email: `${id}@cand.test`, name, passwordHash: 'unused' }).run();
	for (const role of roles) db.insert(table.userRole).values({ userId: id, role }).run();
	for (const teamId of teamIds) db.insert(table.teamMember).values({ teamId, userId: id }).run();
	return loadSessionUser(id)!;
}

function world() {
	const team = (name: string) => {
		const id = `team-${++n}`;
		db.insert(table.team).values({ id, name: `${name} ${n} (test)`, region: 'Test' }).run();
		return id;
	};
	const teamA = team('Basalt Ridge');
	const teamB = team('Saltpan Array');
	const telescope = (teamId: string, name: string) => {
		const id = `tel-${++n}`;
		db.insert(table.telescope)
			.values({
				id,
				teamId,
				name: `${name} ${n} (test)`,
				siteName: 'Test site',
				latitudeDeg: -30,
				longitudeDeg: -70,
				elevationM: 2000,
				apertureM: 0.6,
				fovShape: 'circle',
				fovWidthDeg: 1,
				fovHeightDeg: 1,
				filters: ['g', 'r', 'i'],
				limitingMag: 20,
				limitingMagExposureS: 60,
				robotic: true
			})
			.run();
		return id;
	};
	const telA = telescope(teamA, 'Basalt 0.6 m');
	const telB = telescope(teamB, 'Saltpan 1 m');
	const event = (state: table.GwEvent['state'] = 'active') => {
		const id = `ev-${++n}`;
		db.insert(table.gwEvent).values({ id, sourceEventId: `S-cand-${n}`, role: 'observation', state, eventTime: MERGER }).run();
		return id;
	};
	const eventId = event();
	const observerA = person('Olga Observer', ['observer'], [teamA]);
	const observerB = person('Bo Observer', ['observer'], [teamB]);
	const twoTeams = person('Tove Twoteams', ['observer'], [teamA, teamB]);
	const coordinator = person('Cora Coordinator', ['coordinator'], []);
	const viewer = person('Vic Viewer', ['viewer'], [teamA]);
	return { teamA, teamB, telA, telB, event, eventId, observerA, observerB, twoTeams, coordinator, viewer };
}

const input = (eventId: string, o: Partial<CandidateInput> = {}): CandidateInput => ({
	eventId,
	name: 'AT-demo-1',
	raDeg: 150,
	decDeg: -20,
	discoveredAt: '2026-12-02T02:30:00Z',
	magnitude: 19.4,
	magnitudeErr: 0.08,
	filter: 'r',
	...o
});

function refusal(fn: () => unknown): CandidateError {
	try {
		fn();
	} catch (e) {
		if (e instanceof CandidateError) return e;
		throw e;
	}
	throw new Error('expected a CandidateError');
}

describe('angularSeparationDeg', () => {
	// Reference: astropy 5.2.1 SkyCoord.separation, tests/fixtures/candidates/make_separations.py.
	const fixture = JSON.parse(readFileSync('tests/fixtures/candidates/separations.json', 'utf8')) as {
		pairs: { label: string; ra1Deg: number; dec1Deg: number; ra2Deg: number; dec2Deg: number; separationArcsec: number }[];
	};
	it('agrees with astropy to a micro-arcsecond (relative 1e-12 at large separations)', () => {
		expect(fixture.pairs.length).toBeGreaterThanOrEqual(10);
		for (const p of fixture.pairs) {
			const got = angularSeparationDeg(p.ra1Deg, p.dec1Deg, p.ra2Deg, p.dec2Deg) * 3600;
			expect(Math.abs(got - p.separationArcsec), p.label).toBeLessThan(Math.max(1e-6, 1e-12 * p.separationArcsec));
			// Symmetric in its two points.
			expect(angularSeparationDeg(p.ra2Deg, p.dec2Deg, p.ra1Deg, p.dec1Deg) * 3600, p.label).toBeCloseTo(got, 9);
		}
	});
});

describe('reportCandidate', () => {
	it('stores an observer’s candidate for their only team and logs it to the event’s room after the insert', () => {
		expect.hasAssertions();
		const w = world();
		const heard: LiveMessage[] = [];
		const off = onRecorded((m) => {
			// The row is committed before anyone hears of it.
			if (m.type === 'candidate.reported') expect(db.select().from(table.candidate).where(eq(table.candidate.id, String(m.payload.candidateId))).get()).toBeDefined();
			heard.push(m);
		});
		const out = reportCandidate({ user: w.observerA }, input(w.eventId, { notes: '  faint, on a spiral arm  ' }), NOW);
		off();
		expect(out.warning).toBeNull();
		expect(out.candidate).toMatchObject({
			eventId: w.eventId,
			name: 'AT-demo-1',
			teamId: w.teamA,
			telescopeId: null,
			telescopeName: null,
			reportedBy: 'Olga Observer',
			magnitude: 19.4,
			magnitudeErr: 0.08,
			notes: 'faint, on a spiral arm',
			classification: null,
			discoveredAt: '2026-12-02T02:30:00.000Z',
			near: []
		});
		expect(out.candidate.teamName).toMatch(/^Basalt Ridge/);
		const msg = heard.find((m) => m.type === 'candidate.reported');
		expect(msg?.room).toBe(`event:${w.eventId}`);
		expect(msg?.actor).toBe('Olga Observer');
		expect(msg?.payload).toMatchObject({ candidateId: out.candidate.id, eventId: w.eventId, name: 'AT-demo-1', raDeg: 150, decDeg: -20, magnitude: 19.4, filter: 'r', teamId: w.teamA });
		const log = db.select().from(table.eventLog).where(eq(table.eventLog.action, 'candidate.reported')).all();
		expect(log).toHaveLength(1);
		expect(log[0].seq).toBe(msg?.seq);
	});

	it('names each bad field and stores nothing', () => {
		const w = world();
		const me = { user: w.observerA };
		const cases: [Partial<CandidateInput>, string, RegExp][] = [
			[{ name: 'AT 1' }, 'name', /letters, digits/],
			[{ name: 'A'.repeat(41) }, 'name', /at most 40/],
			[{ name: '' }, 'name', /required/],
			[{ raDeg: 360 }, 'raDeg', /RA \(deg, J2000\) must be from 0 up to \(not including\) 360/],
			[{ raDeg: -0.001 }, 'raDeg', /RA \(deg, J2000\) must be from/],
			[{ decDeg: 90.5 }, 'decDeg', /Dec \(deg, J2000\) must be from −90 to 90/],
			[{ magnitude: 31 }, 'magnitude', /from 5 to 30/],
			[{ magnitude: 4.9 }, 'magnitude', /from 5 to 30/],
			[{ magnitude: 'bright' as unknown as number }, 'magnitude', /must be a number/],
			[{ magnitudeErr: -0.1 }, 'magnitudeErr', /from 0 to 5/],
			[{ filter: 'r-prime-long' }, 'filter', /at most 10/],
			[{ notes: 'x'.repeat(2001) }, 'notes', /2000/],
			[{ discoveredAt: 'yesterday' }, 'discoveredAt', /ISO 8601/],
			[{ discoveredAt: '2026-12-02T03:05:01Z' }, 'discoveredAt', /5 minutes in the future/],
			[{ discoveredAt: '2026-11-30T23:59:59Z' }, 'discoveredAt', /1 day before the merger/],
			[{ telescopeId: w.telA, filter: 'R' }, 'filter', /not one of .* filters \(g, r, i; case-sensitive\)/]
		];
		for (const [o, field, message] of cases) {
			const e = refusal(() => reportCandidate(me, input(w.eventId, o), NOW));
			expect(e.status, JSON.stringify(o)).toBe(422);
			expect(e.fields[field], JSON.stringify(o)).toMatch(message);
		}
		expect(db.select().from(table.candidate).all()).toHaveLength(0);
		// Limits themselves are accepted: 4 min ahead (clock skew), exactly 1 day before, mag 5 and 30, free-text filter without a telescope.
		expect(reportCandidate(me, input(w.eventId, { name: 'a', discoveredAt: '2026-12-02T03:04:00Z', magnitude: 30 }), NOW).candidate.magnitude).toBe(30);
		expect(reportCandidate(me, input(w.eventId, { name: 'b', discoveredAt: '2026-12-01T00:00:00Z', magnitude: 5, filter: 'ATLAS-o' }), NOW).candidate.filter).toBe('ATLAS-o');
	});

	it('keeps a position uncertainty in arcsec, and refuses one that is not positive, too large or not a number, in the form’s words', () => {
		expect.hasAssertions();
		const w = world();
		const me = { user: w.observerA };
		const words = `Position uncertainty (arcsec) must be more than 0 and at most ${POSITION_ERR_ARCSEC_MAX}.`;
		const cases: [unknown, string][] = [
			[0, words],
			[-0.5, words],
			[POSITION_ERR_ARCSEC_MAX + 0.01, words],
			[Number.POSITIVE_INFINITY, 'Position uncertainty (arcsec) must be a number.'],
			['1.5″', 'Position uncertainty (arcsec) must be a number.']
		];
		for (const [value, message] of cases) {
			const e = refusal(() => reportCandidate(me, input(w.eventId, { positionErrArcsec: value as number }), NOW));
			expect(e.status, String(value)).toBe(422);
			expect(e.fields, String(value)).toEqual({ positionErrArcsec: message });
			expect(e.message, String(value)).toBe(message);
		}
		expect(db.select().from(table.candidate).all()).toHaveLength(0);
		// The limit itself is accepted; absent stays null (not zero).
		const wide = reportCandidate(me, input(w.eventId, { name: 'wide', positionErrArcsec: POSITION_ERR_ARCSEC_MAX }), NOW).candidate;
		expect(wide.positionErrArcsec).toBe(POSITION_ERR_ARCSEC_MAX);
		const sharp = reportCandidate(me, input(w.eventId, { name: 'sharp', raDeg: 10, positionErrArcsec: 0.35 }), NOW).candidate;
		expect(sharp.positionErrArcsec).toBe(0.35);
		expect(reportCandidate(me, input(w.eventId, { name: 'none', raDeg: 20 }), NOW).candidate.positionErrArcsec).toBeNull();
		expect(listCandidates(w.eventId).find((c) => c.name === 'sharp')?.positionErrArcsec).toBe(0.35);
	});

	it('answers a name already used in the event with 409 naming the team, whatever the case; another event may reuse it', () => {
		const w = world();
		reportCandidate({ user: w.observerA }, input(w.eventId, { name: 'AT-x' }), NOW);
		const e = refusal(() => reportCandidate({ user: w.observerB }, input(w.eventId, { name: 'at-X', raDeg: 200 }), NOW));
		expect(e.status).toBe(409);
		expect(e.code).toBe('name_taken');
		expect(e.message).toMatch(/^Candidate AT-x is already reported for this event by Basalt Ridge \d+ \(test\)\.$/);
		expect(e.fields.name).toMatch(/Basalt Ridge/);
		const other = w.event();
		expect(reportCandidate({ user: w.observerB }, input(other, { name: 'AT-x' }), NOW).candidate.eventId).toBe(other);
		expect(listCandidates(w.eventId)).toHaveLength(1);
	});

	it('stores a candidate within 2″ of an earlier one and names it; 2.5″ away is not flagged', () => {
		const w = world();
		expect(NEAR_ARCSEC).toBe(2);
		const first = reportCandidate({ user: w.observerA }, input(w.eventId, { name: 'BR-1', raDeg: 201.365, decDeg: -43.019 }), NOW).candidate;
		// 1.533″ away per astropy (fixture pair "diagonal offset at Dec -45").
		const second = reportCandidate({ user: w.observerB }, input(w.eventId, { name: 'SA-7', raDeg: 201.3652, decDeg: -43.0194 }), new Date(NOW.getTime() + 1000));
		expect(second.warning).toMatch(/^SA-7 lies 1\.53″ from BR-1 \(Basalt Ridge \d+ \(test\)\), reported earlier/);
		expect(second.candidate.near).toEqual([{ id: first.id, name: 'BR-1', teamName: first.teamName, separationArcsec: expect.closeTo(1.5332017, 6) }]);
		// 3″ of RA at Dec −43.019 is 2.19″ on the sky: outside, although the Dec is equal.
		const third = reportCandidate({ user: w.observerB }, input(w.eventId, { name: 'SA-8', raDeg: 201.365 + 3 * ARCSEC, decDeg: -43.019 }), new Date(NOW.getTime() + 2000));
		expect(third.warning).toBeNull();
		const farther = reportCandidate({ user: w.observerB }, input(w.eventId, { name: 'SA-9', raDeg: 201.365, decDeg: -43.019 + 2.5 * ARCSEC }), new Date(NOW.getTime() + 3000));
		expect(farther.warning).toBeNull();
		// A candidate of another event at the same place is not a duplicate.
		const other = w.event();
		expect(reportCandidate({ user: w.observerA }, input(other, { name: 'BR-1', raDeg: 201.365, decDeg: -43.019 }), NOW).warning).toBeNull();
		// The list, newest first, shows the pair from both sides.
		const list = listCandidates(w.eventId);
		expect(list.map((c) => c.name)).toEqual(['SA-9', 'SA-8', 'SA-7', 'BR-1']);
		expect(list.find((c) => c.name === 'BR-1')?.near.map((x) => x.name)).toEqual(['SA-7']);
		expect(list.find((c) => c.name === 'SA-8')?.near).toEqual([]);
	});

	it('refuses new candidates for a retracted event with 409', () => {
		const w = world();
		const retracted = w.event('retracted');
		const e = refusal(() => reportCandidate({ user: w.observerA }, input(retracted), NOW));
		expect(e.status).toBe(409);
		expect(e.code).toBe('event_retracted');
		expect(e.message).toMatch(/retracted/);
		expect(refusal(() => reportCandidate({ user: w.observerA }, input('no-such-event'), NOW)).status).toBe(404);
		expect(db.select().from(table.candidate).all()).toHaveLength(0);
		expect(db.select().from(table.eventLog).where(eq(table.eventLog.action, 'candidate.reported')).all()).toHaveLength(0);
	});

	it('takes a robotic telescope’s token report for the telescope’s team, and only for its own telescope', () => {
		const w = world();
		const token = issueToken(SYSTEM, { name: 'robot', telescopeId: w.telB });
		const principal = validateApiToken(token.secret)!;
		const robot: CandidateReporter = { user: null, telescopeId: principal.telescopeId!, tokenId: principal.tokenId };
		const heard: LiveMessage[] = [];
		const off = onRecorded((m) => heard.push(m));
		const out = reportCandidate(robot, input(w.eventId, { name: 'SA-auto-1', filter: 'i' }), NOW);
		off();
		expect(out.candidate).toMatchObject({ teamId: w.teamB, telescopeId: w.telB, reportedBy: expect.stringMatching(/^telescope Saltpan 1 m/) });
		const row = db.select().from(table.candidate).where(eq(table.candidate.id, out.candidate.id)).get()!;
		expect(row.reportedByTokenId).toBe(token.id);
		expect(row.reportedByUserId).toBeNull();
		expect(heard.find((m) => m.type === 'candidate.reported')?.actor).toMatch(/^telescope Saltpan 1 m/);
		expect(refusal(() => reportCandidate(robot, input(w.eventId, { name: 'SA-auto-2', telescopeId: w.telA }), NOW)).status).toBe(403);
		expect(refusal(() => reportCandidate(robot, input(w.eventId, { name: 'SA-auto-3', filter: 'z' }), NOW)).fields.filter).toMatch(/not one of/);
	});

	it('decides the team: the telescope’s, the only one, one named among several; coordinators any; others refused', () => {
		const w = world();
		const e = refusal(() => reportCandidate({ user: w.twoTeams }, input(w.eventId, { name: 't1' }), NOW));
		expect(e.status).toBe(422);
		expect(e.fields.teamId).toMatch(/choose the team/);
		expect(reportCandidate({ user: w.twoTeams }, input(w.eventId, { name: 't2', teamId: w.teamB }), NOW).candidate.teamId).toBe(w.teamB);
		expect(reportCandidate({ user: w.twoTeams }, input(w.eventId, { name: 't3', telescopeId: w.telA }), NOW).candidate.teamId).toBe(w.teamA);
		expect(refusal(() => reportCandidate({ user: w.twoTeams }, input(w.eventId, { name: 't4', telescopeId: w.telA, teamId: w.teamB }), NOW)).fields.teamId).toMatch(/another team/);
		expect(refusal(() => reportCandidate({ user: w.observerA }, input(w.eventId, { name: 't5', teamId: w.teamB }), NOW)).status).toBe(403);
		expect(refusal(() => reportCandidate({ user: w.observerA }, input(w.eventId, { name: 't6', telescopeId: w.telB }), NOW)).status).toBe(403);
		expect(reportCandidate({ user: w.coordinator }, input(w.eventId, { name: 't7', teamId: w.teamB }), NOW).candidate.teamId).toBe(w.teamB);
		expect(reportCandidate({ user: w.coordinator }, input(w.eventId, { name: 't8', telescopeId: w.telA }), NOW).candidate.teamId).toBe(w.teamA);
		expect(refusal(() => reportCandidate({ user: w.coordinator }, input(w.eventId, { name: 't9' }), NOW)).fields.teamId).toMatch(/choose the team/);
		// A viewer, even in a team, may not report.
		expect(refusal(() => reportCandidate({ user: w.viewer }, input(w.eventId, { name: 't10' }), NOW)).status).toBe(403);
		expect(listCandidates(w.eventId).map((c) => c.name).sort()).toEqual(['t2', 't3', 't7', 't8']);
	});
});

describe('listAllCandidates', () => {
	it('lists every event’s candidates newest first with the event’s source id, and counts per event', () => {
		const w = world();
		const second = w.event();
		const at = (s: number) => new Date(NOW.getTime() + s * 1000);
		reportCandidate({ user: w.observerA }, input(w.eventId, { name: 'A1' }), at(1));
		reportCandidate({ user: w.observerA }, input(second, { name: 'B1', raDeg: 10 }), at(2));
		reportCandidate({ user: w.observerB }, input(w.eventId, { name: 'A2', raDeg: 20 }), at(3));
		const all = listAllCandidates();
		expect(all.candidates.map((c) => c.name)).toEqual(['A2', 'B1', 'A1']);
		const sources = new Map(db.select().from(table.gwEvent).all().map((e) => [e.id, e.sourceEventId]));
		for (const c of all.candidates) expect(c.sourceEventId).toBe(sources.get(c.eventId));
		expect(all.events).toEqual([
			{ eventId: w.eventId, sourceEventId: sources.get(w.eventId), state: 'active', count: 2, latestAt: at(3).toISOString() },
			{ eventId: second, sourceEventId: sources.get(second), state: 'active', count: 1, latestAt: at(2).toISOString() }
		]);
		expect(listAllCandidates(2).candidates).toHaveLength(2);
	});
});
