import { afterAll, afterEach, beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { receivedMail, stopFakeSmtp, type ReceivedMail } from '../platform/fake-smtp';
import { record, SYSTEM } from '../platform/realtime';
import { stopService } from '../platform/services';
import { snapshotHeldRanks } from '../targeting/rankings';
import { savePreferences } from '../people/notifications';
import { DEFAULT_PREFERENCES } from '../../notifications.ts';
import { installMovedClaims, movedClaims, notableMove, tellMovedClaims } from './moved-claims';

let n = 0;
beforeEach(() => {
	createTestDatabase();
});
afterEach(() => stopService('moved-claims'));
afterAll(() => stopFakeSmtp());

async function mailTo(email: string, count = 1, timeoutMs = 3000): Promise<ReceivedMail[]> {
	const until = Date.now() + timeoutMs;
	let got = receivedMail().filter((m) => m.to.includes(email));
	while (got.length < count && Date.now() < until) {
		await new Promise((r) => setTimeout(r, 25));
		got = receivedMail().filter((m) => m.to.includes(email));
	}
	return got;
}

function member(teamId: string, name: string) {
	const id = `mc-${++n}-${Date.now()}`;
	const email = `${id}@moved.test`;
	db.insert(table.user).values({ id, email, name, passwordHash: 'unused' }).run();
	db.insert(table.teamMember).values({ teamId, userId: id }).run();
	return { userId: id, email, name };
}

/**
 * Two rankings of one event: map A (ten galaxies, one field of a wide telescope), then map B.
 * Ranks and probabilities (rank/probability; "—" = not ranked under B):
 *   G1 1/0.20 → 2/0.19   small change                     North claims it
 *   G2 2/0.15 → 9/0.02   7 places                           North (observing)
 *   G3 3/0.10 → 3/0.16   probability +60 %                  South
 *   G4 4/0.08 → —        left the ranking                   North
 *   G5 5/0.05 → 1/0.30   moved, but its claim was released  South
 *   G6 6/0.04 → 10/0.01  moved, nobody claims it
 *   F-100 (wide telescope) 1/0.30 → 12/0.05                 North
 */
function world() {
	const id = ++n;
	const eventId = `ev-mc-${id}`;
	db.insert(table.gwEvent)
		.values({ id: eventId, sourceEventId: `S-moved-${id}`, role: 'observation', classification: { BNS: 0.9, NSBH: 0.05, BBH: 0.03, Terrestrial: 0.02 } })
		.run();
	const maps = ['A', 'B'].map((m) => {
		const noticeId = `no-${m}-${id}`;
		db.insert(table.notice)
			.values({ id: noticeId, eventId, ivorn: `ivo://test/${m}-${id}`, kind: 'update', role: 'observation', authoredAt: new Date(), citations: [], parsed: {} })
			.run();
		db.insert(table.skymap).values({ id: `map-${m}-${id}`, eventId, noticeId }).run();
		return `map-${m}-${id}`;
	});
	const catalogId = `cat-mc-${id}`;
	db.insert(table.catalog).values({ id: catalogId, name: `Moved test ${id}`, synthetic: true, columns: {}, state: 'ready' }).run();
	const g = Array.from({ length: 10 }, (_, k) =>
		db
			.insert(table.galaxy)
			.values({ catalogId, row: k, name: `MG-${k + 1}`, raDeg: 10 + k, decDeg: -20, distanceMpc: 100, distanceErrMpc: 10, weight: 1, pixel: 0 })
			.returning()
			.get().id
	);
	const north = `team-n-${id}`;
	const south = `team-s-${id}`;
	db.insert(table.team).values([
		{ id: north, name: 'North Ridge (test)', region: 'Test' },
		{ id: south, name: 'South Vale (test)', region: 'Test' }
	]).run();
	const scope = (teamId: string, name: string, wide: boolean) => {
		const tid = `tel-${name}-${id}`;
		db.insert(table.telescope)
			.values({
				id: tid,
				teamId,
				name,
				siteName: 'Test site',
				latitudeDeg: -30,
				longitudeDeg: -70,
				elevationM: 2000,
				apertureM: 1,
				fovShape: 'rectangle',
				fovWidthDeg: wide ? 2 : 0.2,
				fovHeightDeg: wide ? 2 : 0.2,
				filters: ['r'],
				limitingMag: 21,
				limitingMagExposureS: 60
			})
			.run();
		return tid;
	};
	const tn = scope(north, 'Ridge 1m', false);
	const tw = scope(north, 'Ridge wide', true);
	const ts = scope(south, 'Vale 0.6m', false);

	const rankA: [number, number][] = [[0.2, 1], [0.15, 2], [0.1, 3], [0.08, 4], [0.05, 5], [0.04, 6], [0.03, 7], [0.02, 8], [0.015, 9], [0.01, 10]];
	const putRanking = (skymapId: string, rows: { g: number; rank: number; p: number }[], field: { rank: number; p: number }) => {
		db.delete(table.eventGalaxy).where(eq(table.eventGalaxy.eventId, eventId)).run();
		db.delete(table.eventField).where(eq(table.eventField.eventId, eventId)).run();
		db.delete(table.eventTargetsMeta).where(eq(table.eventTargetsMeta.eventId, eventId)).run();
		db.insert(table.eventGalaxy)
			.values(rows.map((r) => ({ eventId, skymapId, rank: r.rank, galaxyId: g[r.g], score: r.p, probability: r.p, cumulative: 0 })))
			.run();
		db.insert(table.eventField).values({ eventId, skymapId, telescopeId: tw, fieldId: 'F-100', raDeg: 10, decDeg: -20, probability: field.p, cumulative: field.p, rank: field.rank }).run();
		db.insert(table.eventTargetsMeta).values({ eventId, skymapId, catalogId, level: 0.99, fieldCounts: {}, computedAt: new Date() }).run();
	};
	putRanking(maps[0], rankA.map(([p, rank], k) => ({ g: k, rank, p })), { rank: 1, p: 0.3 });

	const claim = (teamId: string, telescopeId: string, kind: 'galaxy' | 'field', targetId: string, state: table.ClaimState = 'claimed') =>
		db.insert(table.claim).values({ id: `cl-${++n}`, eventId, targetKind: kind, targetId, telescopeId, teamId, state, claimedAt: new Date() }).run();
	claim(north, tn, 'galaxy', String(g[0]));
	claim(north, tn, 'galaxy', String(g[1]), 'observing');
	claim(south, ts, 'galaxy', String(g[2]));
	claim(north, tn, 'galaxy', String(g[3]));
	claim(south, ts, 'galaxy', String(g[4]), 'released');
	claim(north, tw, 'field', 'F-100');

	/** What the ranking job does: snapshot the held ranks, then replace the ranking with map B's. */
	const rerank = () => {
		snapshotHeldRanks(db, eventId);
		putRanking(
			maps[1],
			[
				{ g: 4, rank: 1, p: 0.3 },
				{ g: 0, rank: 2, p: 0.19 },
				{ g: 2, rank: 3, p: 0.16 },
				{ g: 6, rank: 4, p: 0.1 },
				{ g: 7, rank: 5, p: 0.08 },
				{ g: 8, rank: 6, p: 0.06 },
				{ g: 9, rank: 7, p: 0.04 },
				{ g: 1, rank: 9, p: 0.02 },
				{ g: 5, rank: 10, p: 0.01 }
			],
			{ rank: 12, p: 0.05 }
		);
	};
	return { eventId, maps, catalogId, north, south, g, rerank };
}

describe('notableMove', () => {
	it('takes 5 places, a 50 % change of probability either way, or leaving the ranking', () => {
		const was = { rank: 10, probability: 0.1 };
		expect(notableMove(was, { rank: 14, probability: 0.1 })).toBe(false);
		expect(notableMove(was, { rank: 15, probability: 0.1 })).toBe(true);
		expect(notableMove(was, { rank: 5, probability: 0.1 })).toBe(true);
		expect(notableMove(was, { rank: 10, probability: 0.149 })).toBe(false);
		expect(notableMove(was, { rank: 10, probability: 0.15 })).toBe(true);
		expect(notableMove(was, { rank: 10, probability: 0.05 })).toBe(true);
		expect(notableMove(was, null)).toBe(true);
	});
});

describe('claims moved by a re-ranking', () => {
	it('finds the open claims that moved notably, per team, from the snapshot of the previous ranking', () => {
		const w = world();
		expect(movedClaims(w.eventId)).toEqual([]);
		w.rerank();
		const teams = movedClaims(w.eventId);
		expect(teams.map((t) => t.teamName)).toEqual(['North Ridge (test)', 'South Vale (test)']);
		const north = teams[0].targets.map((t) => [t.targetName, t.before.rank, t.after?.rank ?? null]);
		expect(north).toEqual([
			['F-100', 1, 12],
			['MG-2', 2, 9],
			['MG-4', 4, null]
		]);
		expect(teams[1].targets.map((t) => [t.targetName, t.before.probability, t.after?.probability])).toEqual([['MG-3', 0.1, 0.16]]);
	});

	it('e-mails each team once on the ranking message, listing old → new, and respects who switched it off', async () => {
		const w = world();
		const ann = member(w.north, 'Ann Ridge');
		const bob = member(w.north, 'Bob Ridge');
		const cat = member(w.south, 'Cat Vale');
		savePreferences(bob.userId, { ...DEFAULT_PREFERENCES, kinds: { 'claims.moved': 'off' } });
		installMovedClaims();
		w.rerank();
		record(SYSTEM, 'targets.ranked', 'board', { eventId: w.eventId, skymapId: w.maps[1], galaxies: 9, fields: 1, catalogId: w.catalogId });
		const [toAnn] = await mailTo(ann.email);
		expect(toAnn.subject).toBe(`S-moved-${w.eventId.split('-').pop()}: a new sky map moved 3 targets North Ridge (test) holds`);
		expect(toAnn.text).toContain('  - field F-100, epoch 1 (Ridge wide): rank 1 → 12, probability 30% → 5.0%');
		expect(toAnn.text).toContain('  - MG-2, epoch 1 (Ridge 1m): rank 2 → 9, probability 15% → 2.0%');
		expect(toAnn.text).toContain('  - MG-4, epoch 1 (Ridge 1m): rank 4 → no longer ranked, probability was 8.0%');
		expect(toAnn.text).not.toContain('MG-1,');
		expect(toAnn.text).toContain('1 of them is now outside the searched region');
		expect(toAnn.text).toContain('/unsubscribe/');
		const [toCat] = await mailTo(cat.email);
		expect(toCat.text).toContain('  - MG-3, epoch 1 (Vale 0.6m): rank 3 → 3, probability 10% → 16%');
		expect(toCat.text).not.toContain('MG-5');
		expect(await mailTo(bob.email, 1, 300)).toEqual([]);
		expect(await mailTo(ann.email, 2, 300)).toHaveLength(1);
	});

	it('says nothing when the same map is ranked again unchanged, or the event was retracted', async () => {
		const w = world();
		const ann = member(w.north, 'Ann Again');
		// Same ranking again: snapshot, nothing replaced.
		snapshotHeldRanks(db, w.eventId);
		expect(movedClaims(w.eventId)).toEqual([]);
		expect(await tellMovedClaims(w.eventId, w.maps[0], w.catalogId)).toBe(0);
		w.rerank();
		db.update(table.gwEvent).set({ state: 'retracted' }).where(eq(table.gwEvent.id, w.eventId)).run();
		expect(await tellMovedClaims(w.eventId, w.maps[1], w.catalogId)).toBe(0);
		expect(await mailTo(ann.email, 1, 300)).toEqual([]);
	});
});
