import { beforeEach, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { loadSessionUser, type SessionUser } from './auth';
import { actsForEveryTeam, mayUseTeam, mayUseTelescope, teamsFor, telescopesFor, usableTelescopes } from './scope';

let n = 0;

function team(name: string) {
	const id = `team-${++n}`;
	db.insert(table.team).values({ id, name, region: 'Test' }).run();
	return id;
}

function telescope(teamId: string, name: string) {
	const id = `tel-${++n}`;
	db.insert(table.telescope)
		.values({
			id,
			teamId,
			name,
			siteName: 'Test site',
			latitudeDeg: -30,
			longitudeDeg: -70,
			elevationM: 2000,
			apertureM: 1,
			fovShape: 'rectangle',
			fovWidthDeg: 0.5,
			fovHeightDeg: 0.5,
			filters: ['g', 'r'],
			limitingMag: 21,
			limitingMagExposureS: 60
		})
		.run();
	return id;
}

function person(name: string, roles: table.Role[], teamIds: string[] = []): SessionUser {
	const id = `user-${++n}`;
	db.insert(table.user).values({ id, email: `${id}@scope.test`, name, passwordHash: 'unused' }).run();
	for (const role of roles) db.insert(table.userRole).values({ userId: id, role }).run();
	for (const teamId of teamIds) db.insert(table.teamMember).values({ teamId, userId: id }).run();
	return loadSessionUser(id)!;
}

describe('what a person may use (rules alone)', () => {
	const telA = { id: 'a1', teamId: 'A' };
	const telB = { id: 'b1', teamId: 'B' };
	const observerA = { roles: ['observer' as const], teamIds: ['A'] };
	const coordinator = { roles: ['coordinator' as const], teamIds: [] };

	it("lets a member of team A use A's telescopes and not B's", () => {
		expect(mayUseTelescope(observerA, telA)).toBe(true);
		expect(mayUseTelescope(observerA, telB)).toBe(false);
		expect(mayUseTeam(observerA, 'A')).toBe(true);
		expect(mayUseTeam(observerA, 'B')).toBe(false);
		expect(usableTelescopes(observerA, [telA, telB])).toEqual([telA]);
	});
	it('lets a coordinator use every team and telescope, member of none', () => {
		expect(actsForEveryTeam(coordinator)).toBe(true);
		expect(mayUseTelescope(coordinator, telB)).toBe(true);
		expect(usableTelescopes(coordinator, [telA, telB])).toEqual([telA, telB]);
	});
	it('gives nobody, and a role in no team, nothing', () => {
		expect(mayUseTelescope(null, telA)).toBe(false);
		expect(mayUseTeam(undefined, 'A')).toBe(false);
		expect(usableTelescopes({ roles: ['duty'], teamIds: [] }, [telA, telB])).toEqual([]);
		expect(actsForEveryTeam({ roles: ['admin'], teamIds: [] })).toBe(false);
	});
	it('lets a member of two teams use both', () => {
		expect(usableTelescopes({ roles: ['observer'], teamIds: ['A', 'B'] }, [telA, telB])).toEqual([telA, telB]);
	});
});

describe('what a person may use (from the database)', () => {
	beforeEach(() => {
		createTestDatabase();
	});

	it("lists team A's telescopes and team for A's observer, every one for a coordinator", () => {
		const a = team('Alpha (scope test)');
		const b = team('Beta (scope test)');
		const a1 = telescope(a, 'Alpha 1m');
		const a2 = telescope(a, 'Alpha 2m');
		const b1 = telescope(b, 'Beta 1m');
		const observerA = person('Ana', ['observer'], [a]);
		const coordinator = person('Cy', ['coordinator']);

		const mine = telescopesFor(observerA);
		expect(mine.map((t) => t.id)).toEqual([a1, a2]);
		expect(mine.every((t) => t.teamName === 'Alpha (scope test)')).toBe(true);
		expect(teamsFor(observerA).map((t) => t.id)).toEqual([a]);

		expect(telescopesFor(coordinator).map((t) => t.id)).toEqual([a1, a2, b1]);
		expect(teamsFor(coordinator).map((t) => t.id)).toEqual([a, b]);
		expect(telescopesFor(null)).toEqual([]);
		expect(teamsFor(null)).toEqual([]);
	});
});
