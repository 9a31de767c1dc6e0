/**
 * One event's work from a team's side: every claim the person's teams made (in any state, also on
 * targets that a newer sky map no longer ranks), the pointings those teams reported, and every open
 * claim of the network. Coordinators, and people in no team, see every team's claims and pointings.
 */
import { and, asc, count, desc, eq, inArray, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import type { SessionUser } from '../people/auth';
import { WORK_POINTINGS_PAGE_SIZE } from '../../limits.ts';

export interface WorkClaim {
	id: string;
	state: table.ClaimState;
	targetKind: table.Claim['targetKind'];
	targetId: string;
	/** Galaxy name or field id; the bare id when the catalogue row is gone. */
	targetName: string;
	raDeg: number | null;
	decDeg: number | null;
	/** Whether the event's current ranking still lists the target. */
	ranked: boolean;
	/** Rank in the current ranking (galaxies; fields by their telescope's order), when ranked. */
	rank: number | null;
	filter: string;
	epoch: number;
	teamId: string;
	teamName: string;
	telescopeName: string;
	claimedBy: string | null;
	claimedAt: string;
	startedAt: string | null;
	doneAt: string | null;
	endedAt: string | null;
	/** Pointings reported against this claim. */
	pointings: number;
}

export interface WorkPointing {
	id: string;
	observedAt: string;
	teamName: string;
	telescopeName: string;
	raDeg: number;
	decDeg: number;
	fieldId: string | null;
	filter: string;
	exposureS: number;
	limitingMag: number;
	source: table.Observation['source'];
	/** The claim this pointing completed, if any. */
	claimId: string | null;
}

/** Which page of a long list is shown: 1-based `page` of `pages`, `total` rows in all. */
export interface Paging {
	page: number;
	pages: number;
	total: number;
	pageSize: number;
}

export interface TeamWork {
	/** Whose work: the person's teams, or every team (coordinators and people in no team). */
	scope: { teams: { id: string; name: string }[]; allTeams: boolean };
	claims: WorkClaim[];
	/** One page of the teams' pointings, newest first (an event may have tens of thousands). */
	pointings: WorkPointing[];
	pointingsPaging: Paging;
	/** Open claims (claimed or observing) of every team. */
	openClaims: WorkClaim[];
}

const iso = (d: Date | null) => (d ? d.toISOString() : null);

function claimRows(eventId: string, where: ReturnType<typeof and>): WorkClaim[] {
	const rows = db
		.select({ c: table.claim, teamName: table.team.name, telescopeName: table.telescope.name, userName: table.user.name })
		.from(table.claim)
		.innerJoin(table.team, eq(table.team.id, table.claim.teamId))
		.innerJoin(table.telescope, eq(table.telescope.id, table.claim.telescopeId))
		.leftJoin(table.user, eq(table.user.id, table.claim.userId))
		.where(where)
		.orderBy(desc(table.claim.claimedAt))
		.all();
	if (!rows.length) return [];

	const galaxyIds = [...new Set(rows.filter((r) => r.c.targetKind === 'galaxy').map((r) => Number(r.c.targetId)).filter(Number.isSafeInteger))];
	const galaxies = new Map(
		(galaxyIds.length
			? db.select({ id: table.galaxy.id, name: table.galaxy.name, raDeg: table.galaxy.raDeg, decDeg: table.galaxy.decDeg }).from(table.galaxy).where(inArray(table.galaxy.id, galaxyIds)).all()
			: []
		).map((g) => [String(g.id), g])
	);
	const galaxyRank = new Map(
		(galaxyIds.length
			? db
					.select({ galaxyId: table.eventGalaxy.galaxyId, rank: table.eventGalaxy.rank })
					.from(table.eventGalaxy)
					.where(and(eq(table.eventGalaxy.eventId, eventId), inArray(table.eventGalaxy.galaxyId, galaxyIds)))
					.all()
			: []
		).map((g) => [String(g.galaxyId), g.rank])
	);
	const fieldIds = [...new Set(rows.filter((r) => r.c.targetKind === 'field').map((r) => r.c.targetId))];
	const fields = new Map(
		(fieldIds.length
			? db
					.select({ fieldId: table.eventField.fieldId, raDeg: table.eventField.raDeg, decDeg: table.eventField.decDeg, rank: table.eventField.rank })
					.from(table.eventField)
					.where(and(eq(table.eventField.eventId, eventId), inArray(table.eventField.fieldId, fieldIds)))
					.all()
			: []
		).map((f) => [f.fieldId, f])
	);
	const counts = new Map(
		db
			.select({ claimId: table.observation.claimId })
			.from(table.observation)
			.where(and(eq(table.observation.eventId, eventId), inArray(table.observation.claimId, rows.map((r) => r.c.id))))
			.all()
			.reduce((m, o) => m.set(o.claimId!, (m.get(o.claimId!) ?? 0) + 1), new Map<string, number>())
	);

	return rows.map(({ c, teamName, telescopeName, userName }) => {
		const galaxy = c.targetKind === 'galaxy' ? galaxies.get(c.targetId) : undefined;
		const field = c.targetKind === 'field' ? fields.get(c.targetId) : undefined;
		const rank = c.targetKind === 'galaxy' ? (galaxyRank.get(c.targetId) ?? null) : (field?.rank ?? null);
		return {
			id: c.id,
			state: c.state,
			targetKind: c.targetKind,
			targetId: c.targetId,
			targetName: galaxy?.name ?? (c.targetKind === 'field' ? c.targetId : `galaxy ${c.targetId}`),
			raDeg: galaxy?.raDeg ?? field?.raDeg ?? null,
			decDeg: galaxy?.decDeg ?? field?.decDeg ?? null,
			ranked: rank !== null,
			rank,
			filter: c.filter,
			epoch: c.epoch,
			teamId: c.teamId,
			teamName,
			telescopeName,
			claimedBy: userName,
			claimedAt: c.claimedAt.toISOString(),
			startedAt: iso(c.startedAt),
			doneAt: iso(c.doneAt),
			endedAt: iso(c.endedAt),
			pointings: counts.get(c.id) ?? 0
		};
	});
}

/** The work of the person's teams on one event (see the module comment for whose work that is). */
export function teamWork(eventId: string, user: SessionUser, o: { pointingsPage?: number } = {}): TeamWork {
	const coordinator = user.roles.includes('coordinator');
	const allTeams = coordinator || user.teamIds.length === 0;
	const teams = db
		.select({ id: table.team.id, name: table.team.name })
		.from(table.team)
		.where(allTeams ? undefined : inArray(table.team.id, user.teamIds))
		.orderBy(asc(table.team.name))
		.all();
	const teamIds = teams.map((t) => t.id);
	const ofEvent = eq(table.claim.eventId, eventId);

	const ofTeams = and(eq(table.observation.eventId, eventId), inArray(table.observation.teamId, teamIds));
	const total = teamIds.length ? (db.select({ n: count() }).from(table.observation).where(ofTeams).get()?.n ?? 0) : 0;
	const pageSize = WORK_POINTINGS_PAGE_SIZE;
	const pages = Math.max(1, Math.ceil(total / pageSize));
	// A page past the end (the list shrank, or a typed URL) shows the last one.
	const page = Math.min(pages, Math.max(1, Math.floor(o.pointingsPage ?? 1)));
	const pointings = total
		? db
				.select({ o: table.observation, teamName: table.team.name, telescopeName: table.telescope.name })
				.from(table.observation)
				.innerJoin(table.team, eq(table.team.id, table.observation.teamId))
				.innerJoin(table.telescope, eq(table.telescope.id, table.observation.telescopeId))
				.where(ofTeams)
				.orderBy(desc(table.observation.observedAt), desc(sql`observation.rowid`))
				.limit(pageSize)
				.offset((page - 1) * pageSize)
				.all()
				.map(({ o, teamName, telescopeName }) => ({
					id: o.id,
					observedAt: o.observedAt.toISOString(),
					teamName,
					telescopeName,
					raDeg: o.raDeg,
					decDeg: o.decDeg,
					fieldId: o.fieldId,
					filter: o.filter,
					exposureS: o.exposureS,
					limitingMag: o.limitingMag,
					source: o.source,
					claimId: o.claimId
				}))
		: [];

	return {
		scope: { teams, allTeams },
		claims: teamIds.length ? claimRows(eventId, and(ofEvent, inArray(table.claim.teamId, teamIds))) : [],
		pointings,
		pointingsPaging: { page, pages, total, pageSize },
		openClaims: claimRows(eventId, and(ofEvent, inArray(table.claim.state, [...table.OPEN_CLAIM_STATES])))
	};
}

/** The teams that claimed a target of, or reported a pointing for, each of `eventIds` (by name). */
export function teamsByEvent(eventIds: string[]): Map<string, { id: string; name: string }[]> {
	const out = new Map<string, { id: string; name: string }[]>();
	if (!eventIds.length) return out;
	const claimed = db
		.selectDistinct({ eventId: table.claim.eventId, id: table.team.id, name: table.team.name })
		.from(table.claim)
		.innerJoin(table.team, eq(table.team.id, table.claim.teamId))
		.where(inArray(table.claim.eventId, eventIds))
		.all();
	const observed = db
		.selectDistinct({ eventId: table.observation.eventId, id: table.team.id, name: table.team.name })
		.from(table.observation)
		.innerJoin(table.team, eq(table.team.id, table.observation.teamId))
		.where(inArray(table.observation.eventId, eventIds))
		.all();
	for (const r of [...claimed, ...observed]) {
		const list = out.get(r.eventId) ?? [];
		if (!list.some((t) => t.id === r.id)) list.push({ id: r.id, name: r.name });
		out.set(r.eventId, list);
	}
	for (const list of out.values()) list.sort((a, b) => a.name.localeCompare(b.name));
	return out;
}
