/**
 * When an event's targets are ranked again (a new sky map, or a coordinator switched its
 * catalogue), the teams holding open claims on targets that moved notably get one e-mail per
 * team listing those targets with old → new rank and probability.
 *
 * The old ranks come from `rank_snapshot`, which the ranking writes in the same transaction as
 * the new ranking, just before the old one is replaced. "Notably" (limits.ts): the target moved
 * at least RERANK_NOTABLE_PLACES places, its probability changed by at least
 * RERANK_NOTABLE_PROBABILITY_CHANGE of its old value, or it left the ranking.
 */
import { and, asc, eq, inArray } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { onRecorded } from '../platform/realtime';
import { restartService } from '../platform/services';
import { config } from '../platform/config';
import { eventClassOf, notify } from '../people/notifications';
import { RERANK_NOTABLE_PLACES, RERANK_NOTABLE_PROBABILITY_CHANGE } from '../../limits.ts';

export interface RankPosition {
	rank: number;
	probability: number;
}

/** Whether a target's move from `before` to `after` (null: no longer ranked) is worth telling its team. */
export function notableMove(before: RankPosition, after: RankPosition | null): boolean {
	if (!after) return true;
	if (Math.abs(after.rank - before.rank) >= RERANK_NOTABLE_PLACES) return true;
	if (before.probability <= 0) return after.probability > 0;
	// A hair of tolerance: 0.10 → 0.15 is a 50 % change even though (0.15 − 0.1) / 0.1 < 0.5 in floating point.
	return Math.abs(after.probability - before.probability) / before.probability >= RERANK_NOTABLE_PROBABILITY_CHANGE - 1e-9;
}

export interface MovedTarget {
	claimId: string;
	targetKind: 'galaxy' | 'field';
	targetId: string;
	/** The galaxy's catalogue name, or the field id. */
	targetName: string;
	filter: string;
	epoch: number;
	telescopeName: string;
	before: RankPosition;
	after: RankPosition | null;
}

export interface TeamMoves {
	teamId: string;
	teamName: string;
	targets: MovedTarget[];
}

export type RerankCause = 'map' | 'catalogue' | 'ranking';

/**
 * Open claims of an event whose targets moved notably between the snapshot and the current
 * ranking, by team (teams by name, targets by old rank). Empty when the event had no earlier ranking.
 */
export function movedClaims(eventId: string): TeamMoves[] {
	const snapshot = db.select().from(table.rankSnapshot).where(eq(table.rankSnapshot.eventId, eventId)).all();
	if (snapshot.length === 0) return [];
	const before = new Map(snapshot.map((s) => [`${s.targetKind}|${s.telescopeId}|${s.targetId}`, s]));
	const open = db
		.select({ c: table.claim, teamName: table.team.name, telescopeName: table.telescope.name })
		.from(table.claim)
		.innerJoin(table.team, eq(table.team.id, table.claim.teamId))
		.innerJoin(table.telescope, eq(table.telescope.id, table.claim.telescopeId))
		.where(and(eq(table.claim.eventId, eventId), inArray(table.claim.state, [...table.OPEN_CLAIM_STATES])))
		.orderBy(asc(table.team.name), asc(table.claim.claimedAt))
		.all();

	const galaxyIds = open.filter((o) => o.c.targetKind === 'galaxy').map((o) => Number(o.c.targetId)).filter(Number.isFinite);
	const galaxiesNow = new Map(
		galaxyIds.length
			? db
					.select({ id: table.eventGalaxy.galaxyId, rank: table.eventGalaxy.rank, probability: table.eventGalaxy.probability })
					.from(table.eventGalaxy)
					.where(and(eq(table.eventGalaxy.eventId, eventId), inArray(table.eventGalaxy.galaxyId, galaxyIds)))
					.all()
					.map((g) => [String(g.id), { rank: g.rank, probability: g.probability }])
			: []
	);
	const galaxyNames = new Map(
		galaxyIds.length
			? db
					.select({ id: table.galaxy.id, name: table.galaxy.name })
					.from(table.galaxy)
					.where(inArray(table.galaxy.id, galaxyIds))
					.all()
					.map((g) => [String(g.id), g.name])
			: []
	);
	const fieldIds = open.filter((o) => o.c.targetKind === 'field').map((o) => o.c.targetId);
	const fieldsNow = new Map(
		fieldIds.length
			? db
					.select({ telescopeId: table.eventField.telescopeId, fieldId: table.eventField.fieldId, rank: table.eventField.rank, probability: table.eventField.probability })
					.from(table.eventField)
					.where(and(eq(table.eventField.eventId, eventId), inArray(table.eventField.fieldId, fieldIds)))
					.all()
					.map((f) => [`${f.telescopeId}|${f.fieldId}`, { rank: f.rank, probability: f.probability }])
			: []
	);

	const byTeam = new Map<string, TeamMoves>();
	for (const { c, teamName, telescopeName } of open) {
		const telescopeKey = c.targetKind === 'galaxy' ? '' : c.telescopeId;
		const old = before.get(`${c.targetKind}|${telescopeKey}|${c.targetId}`);
		if (!old) continue;
		const now = (c.targetKind === 'galaxy' ? galaxiesNow.get(c.targetId) : fieldsNow.get(`${c.telescopeId}|${c.targetId}`)) ?? null;
		const was = { rank: old.rank, probability: old.probability };
		if (!notableMove(was, now)) continue;
		const team = byTeam.get(c.teamId) ?? { teamId: c.teamId, teamName, targets: [] };
		team.targets.push({
			claimId: c.id,
			targetKind: c.targetKind,
			targetId: c.targetId,
			targetName: c.targetKind === 'galaxy' ? (galaxyNames.get(c.targetId) ?? `galaxy ${c.targetId}`) : c.targetId,
			filter: c.filter,
			epoch: c.epoch,
			telescopeName,
			before: was,
			after: now
		});
		byTeam.set(c.teamId, team);
	}
	for (const t of byTeam.values()) t.targets.sort((a, b) => a.before.rank - b.before.rank);
	return [...byTeam.values()];
}

/** What made the ranking change, from the snapshot's map and catalogue against the new ones. */
export function rerankCause(eventId: string, skymapId: string, catalogId: string | null): RerankCause {
	const s = db.select().from(table.rankSnapshot).where(eq(table.rankSnapshot.eventId, eventId)).get();
	if (!s) return 'ranking';
	if (s.fromSkymapId !== skymapId) return 'map';
	if ((s.fromCatalogId ?? null) !== catalogId) return 'catalogue';
	return 'ranking';
}

/** Two significant figures: 30%, 5.0%, 0.12%. */
const pct = (p: number) => `${(p * 100).toPrecision(2)}%`;

export function describeMove(t: MovedTarget): string {
	const what = `${t.targetKind === 'galaxy' ? t.targetName : `field ${t.targetName}`}${t.filter ? ` in ${t.filter}` : ''}, epoch ${t.epoch} (${t.telescopeName})`;
	const rank = t.after ? `rank ${t.before.rank} → ${t.after.rank}` : `rank ${t.before.rank} → no longer ranked`;
	const probability = t.after ? `probability ${pct(t.before.probability)} → ${pct(t.after.probability)}` : `probability was ${pct(t.before.probability)}`;
	return `  - ${what}: ${rank}, ${probability}`;
}

const CAUSE_WORDS: Record<RerankCause, string> = {
	map: 'A new sky map',
	catalogue: 'A switch to another galaxy catalogue',
	ranking: 'A new ranking'
};

export function composeMovedMail(o: { sourceEventId: string; eventId: string; team: TeamMoves; cause: RerankCause; recipientName: string }): { subject: string; text: string } {
	const n = o.team.targets.length;
	const left = o.team.targets.filter((t) => !t.after).length;
	const subject = `${o.sourceEventId}: ${CAUSE_WORDS[o.cause].toLowerCase()} moved ${n} target${n === 1 ? '' : 's'} ${o.team.teamName} holds`;
	const text = [
		`${o.recipientName},`,
		'',
		`${CAUSE_WORDS[o.cause]} re-ranked the targets of ${o.sourceEventId}. These open claims of ${o.team.teamName} moved notably ` +
			`(${RERANK_NOTABLE_PLACES} places or more, a probability ${Math.round(RERANK_NOTABLE_PROBABILITY_CHANGE * 100)}% higher or lower, or out of the ranking):`,
		'',
		...o.team.targets.map(describeMove),
		'',
		left
			? `${left === n ? (n === 1 ? 'It is' : 'They are') : `${left} of them ${left === 1 ? 'is' : 'are'}`} now outside the searched region: consider releasing ${left === 1 ? 'that claim' : 'those claims'} for better targets.`
			: 'Your claims still hold; consider whether the new order changes what you observe first.',
		'',
		`Targets: ${config.publicUrl}/events/${encodeURIComponent(o.eventId)}/targets`
	].join('\n');
	return { subject, text };
}

/**
 * Tell every member of each team with notably moved claims, one mail per team (a person in two
 * such teams gets two). Returns the number of mails handed over or queued by preferences.
 */
export async function tellMovedClaims(eventId: string, skymapId: string, catalogId: string | null): Promise<number> {
	const teams = movedClaims(eventId);
	if (teams.length === 0) return 0;
	const cause = rerankCause(eventId, skymapId, catalogId);
	const event = db
		.select({ sourceEventId: table.gwEvent.sourceEventId, classification: table.gwEvent.classification, state: table.gwEvent.state })
		.from(table.gwEvent)
		.where(eq(table.gwEvent.id, eventId))
		.get();
	if (!event || event.state !== 'active') return 0;
	const eventClass = eventClassOf(event.classification);
	const members = db
		.select({ teamId: table.teamMember.teamId, userId: table.user.id, name: table.user.name, email: table.user.email, disabledAt: table.user.disabledAt })
		.from(table.teamMember)
		.innerJoin(table.user, eq(table.user.id, table.teamMember.userId))
		.where(inArray(table.teamMember.teamId, teams.map((t) => t.teamId)))
		.orderBy(asc(table.user.name))
		.all()
		.filter((m) => !m.disabledAt);
	let handed = 0;
	for (const team of teams) {
		for (const m of members.filter((x) => x.teamId === team.teamId)) {
			const mail = composeMovedMail({ sourceEventId: event.sourceEventId, eventId, team, cause, recipientName: m.name });
			try {
				if ((await notify(m, 'claims.moved', eventClass, mail)) !== 'none') handed++;
			} catch (e) {
				console.error(`moved-claims mail to ${m.email} failed`, e);
			}
		}
	}
	return handed;
}

/**
 * React to every ranking (logged to the board and the event's room: the board copy only). The
 * moves are read at once, while the snapshot belongs to this ranking; the mails go after.
 * Installing twice replaces the first.
 */
export function installMovedClaims(): () => void {
	return restartService('moved-claims', () => {
		let pending: Promise<unknown> = Promise.resolve();
		const off = onRecorded('targets.ranked', ({ eventId, skymapId, catalogId }, m) => {
			if (m.room !== 'board') return;
			const job = tellMovedClaims(eventId, skymapId, catalogId);
			pending = pending.then(() => job).catch((e) => console.error(`moved-claims mails for ${eventId} failed`, e));
		});
		return { stop: off };
	});
}
