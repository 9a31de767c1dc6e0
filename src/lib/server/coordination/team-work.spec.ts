import { beforeEach, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { loadSessionUser, type SessionUser } from '../people/auth';
import { teamWork } from './team-work';

let n = 0;
const T0 = Date.parse('2030-04-12T20:00:00Z');

function team(name: string) {
	const id = `team-${++n}`;
	db.insert(table.team).values({ id, name, region: 'Test' }).run();
	return id;
}

function telescope(teamId: string, name: string) {
	const id = `tel-${++n}`;
	db.insert(table.telescope)
		.values({ id, teamId, name, siteName: 'Test site', latitudeDeg: -30, longitudeDeg: -70, elevationM: 2000, apertureM: 1, fovShape: 'rectangle', fovWidthDeg: 0.5, fovHeightDeg: 0.5, filters: ['r'], limitingMag: 21, limitingMagExposureS: 60 })
		.run();
	return id;
}

function person(name: string, roles: table.Role[], teamIds: string[] = []): SessionUser {
	const id = `user-${++n}`;
	db.insert(table.user).values({ id, email: `${id}@work.test`, name, passwordHash: 'unused' }).run();
	for (const role of roles) db.insert(table.userRole).values({ userId: id, role }).run();
	for (const teamId of teamIds) db.insert(table.teamMember).values({ teamId, userId: id }).run();
	return loadSessionUser(id)!;
}

function claim(o: { eventId: string; teamId: string; telescopeId: string; userId: string; kind?: 'galaxy' | 'field'; targetId: string; state: table.ClaimState; minutes: number }) {
	const id = `claim-${++n}`;
	db.insert(table.claim)
		.values({ id, eventId: o.eventId, targetKind: o.kind ?? 'galaxy', targetId: o.targetId, telescopeId: o.telescopeId, teamId: o.teamId, userId: o.userId, state: o.state, claimedAt: new Date(T0 + o.minutes * 60_000) })
		.run();
	return id;
}

describe('an event from a team’s side', () => {
	let eventId: string;
	let altiplano: string;
	let karoo: string;
	let pardo: string;
	let schmidt: string;
	let observerA: SessionUser;
	let observerB: SessionUser;
	let coordinator: SessionUser;
	let ranked: number;
	let dropped: number;
	const ids: Record<string, string> = {};

	beforeEach(() => {
		createTestDatabase();
		altiplano = team('Altiplano (test)');
		karoo = team('Karoo (test)');
		pardo = telescope(altiplano, 'Pardo (test)');
		schmidt = telescope(karoo, 'Schmidt (test)');
		observerA = person('Alma', ['observer'], [altiplano]);
		observerB = person('Kofi', ['observer'], [karoo]);
		coordinator = person('Cora', ['coordinator']);
		eventId = 'ev-work';
		db.insert(table.gwEvent).values({ id: eventId, sourceEventId: 'SXWORK', role: 'observation', state: 'active', eventTime: new Date(T0) }).run();
		db.insert(table.notice).values({ id: 'n1', eventId, ivorn: 'ivo://test#1', kind: 'initial', role: 'observation', authoredAt: new Date(T0), citations: [], parsed: {} }).run();
		db.insert(table.skymap).values({ id: 'map2', eventId, noticeId: 'n1' }).run();
		db.insert(table.catalog).values({ id: 'cat', name: 'Test catalogue', synthetic: true, columns: {}, state: 'ready' }).run();
		const gal = (name: string, raDeg: number) =>
			db.insert(table.galaxy).values({ catalogId: 'cat', row: n++, name, raDeg, decDeg: -20, distanceMpc: 100, distanceErrMpc: 10, weight: 1, pixel: 0 }).returning().get().id;
		ranked = gal('TG ranked', 10);
		dropped = gal('TG dropped', 20);
		// The current map ranks one of the two galaxies; the other was ranked by the previous map only.
		db.insert(table.eventGalaxy).values({ eventId, skymapId: 'map2', rank: 7, galaxyId: ranked, score: 1, probability: 0.1, cumulative: 0.1 }).run();

		ids.aDone = claim({ eventId, teamId: altiplano, telescopeId: pardo, userId: observerA.id, targetId: String(ranked), state: 'done', minutes: 0 });
		ids.aDropped = claim({ eventId, teamId: altiplano, telescopeId: pardo, userId: observerA.id, targetId: String(dropped), state: 'claimed', minutes: 5 });
		ids.aReleased = claim({ eventId, teamId: altiplano, telescopeId: pardo, userId: observerA.id, targetId: String(dropped), state: 'released', minutes: 1 });
		ids.bOpen = claim({ eventId, teamId: karoo, telescopeId: schmidt, userId: observerB.id, kind: 'field', targetId: 'F0042', state: 'observing', minutes: 3 });
		const pointing = (teamId: string, telescopeId: string, claimId: string | null, minutes: number) =>
			db
				.insert(table.observation)
				.values({ id: `obs-${++n}`, eventId, telescopeId, teamId, observedAt: new Date(T0 + minutes * 60_000), raDeg: 10, decDeg: -20, filter: 'r', exposureS: 60, limitingMag: 20.5, source: 'form', claimId })
				.run();
		pointing(altiplano, pardo, ids.aDone, 2);
		pointing(altiplano, pardo, null, 9);
		pointing(karoo, schmidt, null, 4);
	});

	it('lists the team’s claims in every state, newest first, marking those the current ranking dropped, and its pointings only', () => {
		expect.hasAssertions();
		const w = teamWork(eventId, observerA);
		expect(w.scope).toEqual({ teams: [{ id: altiplano, name: 'Altiplano (test)' }], allTeams: false });
		expect(w.claims.map((c) => c.id)).toEqual([ids.aDropped, ids.aReleased, ids.aDone]);
		const byId = Object.fromEntries(w.claims.map((c) => [c.id, c]));
		expect(byId[ids.aDone]).toMatchObject({ state: 'done', targetName: 'TG ranked', ranked: true, rank: 7, pointings: 1, teamName: 'Altiplano (test)', telescopeName: 'Pardo (test)', claimedBy: 'Alma' });
		expect(byId[ids.aDropped]).toMatchObject({ state: 'claimed', targetName: 'TG dropped', ranked: false, rank: null, raDeg: 20, decDeg: -20, pointings: 0 });
		expect(w.pointings).toHaveLength(2);
		expect(w.pointings.every((p) => p.teamName === 'Altiplano (test)')).toBe(true);
		expect(w.pointings[0].observedAt > w.pointings[1].observedAt).toBe(true);
		expect(w.pointings.find((p) => p.claimId === ids.aDone)).toBeDefined();
	});

	it('lists every team’s open claims for everyone, and every team’s work for a coordinator', () => {
		expect.hasAssertions();
		for (const who of [observerA, observerB, coordinator]) {
			const open = teamWork(eventId, who).openClaims;
			expect(open.map((c) => c.id).sort()).toEqual([ids.aDropped, ids.bOpen].sort());
		}
		const field = teamWork(eventId, observerA).openClaims.find((c) => c.id === ids.bOpen)!;
		// A field that the current ranking does not list: named by its id, position unknown.
		expect(field).toMatchObject({ targetKind: 'field', targetName: 'F0042', ranked: false, raDeg: null, teamName: 'Karoo (test)' });
		const b = teamWork(eventId, observerB);
		expect(b.claims.map((c) => c.id)).toEqual([ids.bOpen]);
		expect(b.pointings).toHaveLength(1);
		const all = teamWork(eventId, coordinator);
		expect(all.scope.allTeams).toBe(true);
		expect(all.claims).toHaveLength(4);
		expect(all.pointings).toHaveLength(3);
		expect(teamWork('no-such-event', observerA)).toMatchObject({ claims: [], pointings: [], openClaims: [] });
	});
});
