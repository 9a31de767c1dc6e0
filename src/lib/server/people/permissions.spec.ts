import { describe, expect, it } from 'vitest';
import { can, PERMISSIONS, permissionsOf, rolesOutOfReach, type Permission } from './permissions';
import { ROLES, type Role } from '../platform/db/schema';

const person = (...roles: Role[]) => ({ user: { id: 'u', email: 'u@x.test', name: 'U', roles, teamIds: [] } });

describe('permissions table', () => {
	it('lets every role see the board and manage its own account', () => {
		for (const r of ROLES) {
			expect(can(person(r), 'board.view')).toBe(true);
			expect(can(person(r), 'account.manage')).toBe(true);
		}
	});
	it('keeps administration to admins and coordinators', () => {
		const expected: Record<Permission, Role[]> = {
			'board.view': [...ROLES],
			'events.view': [...ROLES],
			'telescopes.view': [...ROLES],
			'teams.view': [...ROLES],
			'account.manage': [...ROLES],
			'admin.view': ['admin', 'coordinator'],
			'people.invite': ['admin', 'coordinator'],
			'people.manage': ['admin'],
			'teams.manage': ['admin', 'coordinator'],
			'telescopes.manage': ['admin', 'coordinator'],
			'tokens.manage': ['admin'],
			'mailbox.view': ['admin'],
			'phonelog.view': ['admin'],
			'notices.submit': ['admin', 'coordinator', 'duty'],
			'events.acknowledge': ['duty', 'coordinator'],
			'triage.view': ['admin', 'coordinator', 'duty'],
			'triage.manage': ['admin', 'coordinator'],
			'notices.inbox': ['admin', 'coordinator', 'duty'],
			'notices.retry': ['admin', 'coordinator'],
			'notices.vocabulary': ['admin', 'coordinator'],
			'shifts.manage': ['admin', 'coordinator'],
			'catalogs.manage': ['admin', 'coordinator'],
			'claims.create': ['observer', 'coordinator'],
			'claims.manage': ['coordinator'],
			'targets.catalog': ['coordinator'],
			'observations.report': ['observer', 'coordinator'],
			'candidates.report': ['observer', 'coordinator'],
			'candidates.photometry': ['observer', 'spectroscopist', 'coordinator'],
			'candidates.spectroscopy': ['spectroscopist', 'coordinator'],
			'candidates.classify': ['spectroscopist', 'coordinator'],
			'candidates.decide': ['duty', 'observer', 'spectroscopist', 'coordinator'],
			'candidates.discuss': ['admin', 'coordinator', 'duty', 'observer', 'spectroscopist'],
			'kilonova.thresholds': ['coordinator'],
			'records.annotate': ['coordinator'],
			'records.send': ['coordinator'],
			'settings.mailing-list': ['admin', 'coordinator'],
			'events.close': ['coordinator'],
			'webhooks.manage': ['admin', 'coordinator'],
			'calendar.own': [...ROLES],
			'calendar.roster': ['admin', 'coordinator']
		};
		expect(Object.keys(PERMISSIONS).sort()).toEqual(Object.keys(expected).sort());
		for (const [perm, roles] of Object.entries(expected) as [Permission, Role[]][]) {
			for (const r of ROLES) expect(can(person(r), perm), `${r} → ${perm}`).toBe(roles.includes(r));
		}
	});
	it('lists what a person may do, for the pages to show only those links and buttons', () => {
		const duty = permissionsOf(person('duty'));
		expect(duty).toContain('triage.view');
		expect(duty).toContain('notices.inbox');
		expect(duty).not.toContain('triage.manage');
		expect(duty).not.toContain('notices.retry');
		expect(permissionsOf(person('viewer')).every((p) => can(person('viewer'), p))).toBe(true);
		expect(permissionsOf(null)).toEqual([]);
	});
	it('grants the union of several roles', () => {
		expect(can(person('viewer', 'coordinator'), 'people.invite')).toBe(true);
		expect(can(person('viewer', 'observer'), 'people.invite')).toBe(false);
	});
	it('gives nothing to nobody, and nothing to a telescope token outside robot actions', () => {
		expect(can(null, 'board.view')).toBe(false);
		expect(can({ user: null }, 'board.view')).toBe(false);
		expect(can({ user: null, telescopeId: 't1' }, 'people.invite')).toBe(false);
		expect(can({ user: null, telescopeId: 't1' }, 'claims.create')).toBe(false);
		expect(can({ user: null, telescopeId: 't1' }, 'observations.report')).toBe(true);
		expect(can({ user: null, telescopeId: 't1' }, 'candidates.report')).toBe(true);
		expect(can({ user: null, telescopeId: null }, 'candidates.report')).toBe(false);
	});
	it('lets only an administrator grant Administrator, and nobody a role above their own', () => {
		expect(rolesOutOfReach(['coordinator'], ['admin'])).toEqual(['admin']);
		expect(rolesOutOfReach(['coordinator'], ['viewer', 'admin', 'observer'])).toEqual(['admin']);
		expect(rolesOutOfReach(['coordinator'], ['coordinator', 'duty', 'observer', 'spectroscopist', 'viewer'])).toEqual([]);
		expect(rolesOutOfReach(['admin'], [...ROLES])).toEqual([]);
		// Several roles: the highest one counts.
		expect(rolesOutOfReach(['viewer', 'coordinator'], ['coordinator'])).toEqual([]);
		// Peers of the same rank may hand out each other's roles, not a coordinator's.
		expect(rolesOutOfReach(['duty'], ['observer', 'viewer'])).toEqual([]);
		expect(rolesOutOfReach(['duty'], ['coordinator'])).toEqual(['coordinator']);
		expect(rolesOutOfReach(['viewer'], ['duty'])).toEqual(['duty']);
		expect(rolesOutOfReach([], ['viewer'])).toEqual(['viewer']);
	});
});
