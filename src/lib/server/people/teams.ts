import { asc, eq, and } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId } from './auth';
import { record, type Actor } from '../platform/realtime';
import { InputError } from '../platform/errors';

export class TeamError extends InputError {}

export function listTeams() {
	const teams = db.select().from(table.team).orderBy(asc(table.team.name)).all();
	const members = db
		.select({ teamId: table.teamMember.teamId, userId: table.user.id, name: table.user.name, email: table.user.email })
		.from(table.teamMember)
		.innerJoin(table.user, eq(table.user.id, table.teamMember.userId))
		.orderBy(asc(table.user.name))
		.all();
	const scopes = db
		.select({ id: table.telescope.id, name: table.telescope.name, teamId: table.telescope.teamId })
		.from(table.telescope)
		.orderBy(asc(table.telescope.name))
		.all();
	return teams.map((t) => ({
		...t,
		members: members.filter((m) => m.teamId === t.id),
		telescopes: scopes.filter((s) => s.teamId === t.id)
	}));
}

export function createTeam(actor: Actor, input: { name: string; region: string; description: string; isDemo?: boolean }) {
	if (db.select({ id: table.team.id }).from(table.team).where(eq(table.team.name, input.name)).get())
		throw new TeamError('A team with this name exists.', 'name');
	const id = randomId();
	db.insert(table.team).values({ id, ...input }).run();
	record(actor, 'team.created', 'board', { teamId: id, name: input.name });
	return id;
}

export function updateTeam(actor: Actor, id: string, input: { name: string; region: string; description: string }) {
	const clash = db.select({ id: table.team.id }).from(table.team).where(eq(table.team.name, input.name)).get();
	if (clash && clash.id !== id) throw new TeamError('A team with this name exists.', 'name');
	const res = db.update(table.team).set(input).where(eq(table.team.id, id)).run();
	if (!res.changes) throw new TeamError('No such team.');
	record(actor, 'team.updated', 'board', { teamId: id, name: input.name });
}

export function addMember(actor: Actor, teamId: string, userId: string) {
	const t = db.select({ id: table.team.id }).from(table.team).where(eq(table.team.id, teamId)).get();
	const u = db.select({ id: table.user.id }).from(table.user).where(eq(table.user.id, userId)).get();
	if (!t || !u) throw new TeamError('Unknown team or person.', 'userId');
	db.insert(table.teamMember).values({ teamId, userId }).onConflictDoNothing().run();
	record(actor, 'team.member-added', 'board', { teamId, userId });
}

export function removeMember(actor: Actor, teamId: string, userId: string) {
	db.delete(table.teamMember).where(and(eq(table.teamMember.teamId, teamId), eq(table.teamMember.userId, userId))).run();
	record(actor, 'team.member-removed', 'board', { teamId, userId });
}
