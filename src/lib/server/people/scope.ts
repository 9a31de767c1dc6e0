/**
 * Which teams and telescopes a person may act for (claim with, report for): the teams they
 * belong to, and every team for a coordinator. The permissions table says whether a role may
 * take an action at all; this says for which team's telescopes.
 */
import type { SessionUser } from './auth';
import { listTelescopes } from './telescopes';
import { listTeams } from './teams';

type Person = Pick<SessionUser, 'roles' | 'teamIds'>;

/** Coordinators act for every team. */
export function actsForEveryTeam(user: Person): boolean {
	return user.roles.includes('coordinator');
}

/** May this person act for this team? */
export function mayUseTeam(user: Person | null | undefined, teamId: string): boolean {
	return Boolean(user && (actsForEveryTeam(user) || user.teamIds.includes(teamId)));
}

/** May this person use this telescope? Only if they may act for its team. */
export function mayUseTelescope(user: Person | null | undefined, telescope: { teamId: string }): boolean {
	return mayUseTeam(user, telescope.teamId);
}

/** The telescopes of a list this person may use, in the list's order. */
export function usableTelescopes<T extends { teamId: string }>(user: Person | null | undefined, telescopes: readonly T[]): T[] {
	return telescopes.filter((t) => mayUseTelescope(user, t));
}

/** Telescopes this person may use, with their team's name, ordered by team and name. */
export function telescopesFor(user: Person | null | undefined) {
	return user ? usableTelescopes(user, listTelescopes()) : [];
}

/** Teams this person may act for, ordered by name. */
export function teamsFor(user: Person | null | undefined) {
	return user ? listTeams().filter((t) => mayUseTeam(user, t.id)) : [];
}
