import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, afterEach, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { onRecorded, SYSTEM, type LiveMessage } from '../platform/realtime';
import { saveUpload, useStorageRoot } from '../platform/storage';
import { DomainError } from '../platform/errors';
import { loadSessionUser } from '../people/auth';
import { createTeam } from '../people/teams';
import { createTelescope } from '../people/telescopes';
import { commitNotice, processInbox } from '../alerts/ingest';
import { importCatalog } from './catalogs';
import { clearTargetCaches, eventGalaxies, installTargets, targetsIdle, targetsMeta } from './rankings';
import { claimsOutsideRanking, eventCatalogView, switchEventCatalog } from './event-catalog';
import { DEMO_TELESCOPES } from '../../../../seeds/scenario';

const FIX = fileURLToPath(new URL('../../../../tests/fixtures/notices/', import.meta.url));
/** The update notice's map: a 1.2° blob at RA 197.9°, Dec −23.3° (tests/fixtures/notices/README.md). */
const demoMap = readFileSync(FIX + 'skymap-demo.multiorder.fits.gz');
const updateXml = readFileSync(FIX + 'bns-update.xml', 'utf8');

/** 200 invented galaxies within about a degree of the demo map's peak, at 80–180 Mpc. */
function nearCatalogue(): string {
	const lines = ['id,ra,dec,distance,distance_err'];
	for (let k = 0; k < 200; k++) {
		const r = 1.0 * Math.sqrt((k + 0.5) / 200);
		const a = k * 2.39996;
		lines.push(`NEAR-${k},${(197.9 + (r * Math.cos(a)) / Math.cos((23.3 * Math.PI) / 180)).toFixed(5)},${(-23.3 + r * Math.sin(a)).toFixed(5)},${80 + (k % 100)},10`);
	}
	return lines.join('\n') + '\n';
}
/** The four-galaxy test file that once displaced the full catalogue: nowhere near the map. */
const FOUR = 'id,ra,dec,distance\nFOUR-1,10,40,100\nFOUR-2,11,41,100\nFOUR-3,12,42,100\nFOUR-4,13,43,100\n';

let storage: string;
let log: LiveMessage[];
let stop: (() => void)[] = [];

beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-event-catalog-'));
	useStorageRoot(storage);
});
afterAll(() => {
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
});
beforeEach(() => {
	createTestDatabase();
	clearTargetCaches();
	log = [];
	stop = [onRecorded((m) => log.push(m)), installTargets()];
});
afterEach(() => {
	for (const s of stop) s();
});

async function world() {
	const teamId = createTeam(SYSTEM, { name: 'Canaria (test)', region: 'nowhere', description: '' });
	const { team: _team, ...tenaz } = DEMO_TELESCOPES.find((x) => x.name === 'Tenaz 2.0 m')!;
	void _team;
	const telescopeId = createTelescope(SYSTEM, { ...tenaz, teamId });
	const near = await importCatalog(SYSTEM, { name: 'Near galaxies', synthetic: true }, [nearCatalogue()]);
	expect(near.state).toBe('ready');
	const c = commitNotice(updateXml, 'upload', { uploadedSkymapPath: saveUpload(new Uint8Array(demoMap)).path });
	const eventId = (await processInbox(c.inboxId)).eventId!;
	await targetsIdle();
	const coordinatorId = 'coord-1';
	db.insert(table.user).values({ id: coordinatorId, email: 'coord@catalog.test', name: 'Cora Coordinator', passwordHash: 'unused' }).run();
	db.insert(table.userRole).values({ userId: coordinatorId, role: 'coordinator' }).run();
	return { teamId, telescopeId, nearId: near.catalogId, eventId, coordinator: loadSessionUser(coordinatorId)! };
}

/** A claim row as the claims module stores it (the Sun check depends on today's date, so it is bypassed here). */
function heldClaim(w: Awaited<ReturnType<typeof world>>, kind: 'galaxy' | 'field', targetId: string, state: table.ClaimState = 'claimed') {
	const id = `claim-${kind}-${targetId}`;
	db.insert(table.claim).values({ id, eventId: w.eventId, targetKind: kind, targetId, telescopeId: w.telescopeId, teamId: w.teamId, state, claimedAt: new Date() }).run();
	return id;
}

describe('an event keeps its catalogue', () => {
	it('is ranked against the catalogue in use when it arrived; a later import re-ranks nothing', async () => {
		expect.hasAssertions();
		const w = await world();
		expect(db.select().from(table.gwEvent).where(eq(table.gwEvent.id, w.eventId)).get()!.catalogId).toBe(w.nearId);
		const before = eventGalaxies(w.eventId, { limit: 500 });
		expect(before.total).toBeGreaterThan(50);
		const claimed = heldClaim(w, 'galaxy', String(before.galaxies[0].galaxyId));
		const rankedAt = targetsMeta(w.eventId)!.computedAt;
		log = [];

		const four = await importCatalog(SYSTEM, { name: 'Four test galaxies' }, [FOUR]);
		expect(four.state).toBe('ready');
		await targetsIdle();
		// Nothing re-ranked: same catalogue, same rows, the claim's galaxy still ranked.
		expect(log.filter((m) => m.type === 'targets.ranked')).toEqual([]);
		expect(targetsMeta(w.eventId)).toMatchObject({ catalogId: w.nearId, computedAt: rankedAt });
		expect(eventGalaxies(w.eventId, { limit: 500 }).galaxies.map((g) => g.name)).toEqual(before.galaxies.map((g) => g.name));
		expect(claimsOutsideRanking(w.eventId)).toEqual([]);
		expect(db.select().from(table.claim).where(eq(table.claim.id, claimed)).get()!.state).toBe('claimed');

		// An event arriving now takes the new catalogue.
		const c = commitNotice(updateXml.replaceAll('SX30041207', 'SX30041299'), 'upload', { uploadedSkymapPath: saveUpload(new Uint8Array(demoMap)).path });
		const later = (await processInbox(c.inboxId)).eventId!;
		await targetsIdle();
		expect(targetsMeta(later)!.catalogId).toBe(four.catalogId);
		expect(eventCatalogView(later)!.catalog!.name).toBe('Four test galaxies');
	}, 60_000);

	it('switches a live event only once confirmed, lists the claims left outside the ranking, and switches back', async () => {
		expect.hasAssertions();
		const w = await world();
		const four = await importCatalog(SYSTEM, { name: 'Four test galaxies' }, [FOUR]);
		await targetsIdle();
		const ranked = eventGalaxies(w.eventId, { limit: 5 }).galaxies;
		const open = heldClaim(w, 'galaxy', String(ranked[0].galaxyId));
		const done = heldClaim(w, 'galaxy', String(ranked[1].galaxyId), 'done');
		heldClaim(w, 'galaxy', String(ranked[2].galaxyId), 'released');
		const field = heldClaim(w, 'field', 'T0150-F00042');

		// Unconfirmed: nothing changes, the preview says what would happen.
		const asked = switchEventCatalog(w.coordinator, w.eventId, four.catalogId, { confirmed: false });
		expect(asked).toMatchObject({ switched: false, needsConfirmation: true, preview: { from: { id: w.nearId }, to: { id: four.catalogId, name: 'Four test galaxies' }, claimsLeftOutside: 2 } });
		await targetsIdle();
		expect(targetsMeta(w.eventId)!.catalogId).toBe(w.nearId);
		// Only the field claim (no wide telescope, so no ranked fields) is outside the ranking so far.
		expect(claimsOutsideRanking(w.eventId).map((c) => c.id)).toEqual([field]);

		const done1 = switchEventCatalog(w.coordinator, w.eventId, four.catalogId, { confirmed: true });
		expect(done1.switched).toBe(true);
		expect(eventCatalogView(w.eventId)).toMatchObject({ catalog: { id: four.catalogId }, reranking: true });
		await targetsIdle();
		expect(targetsMeta(w.eventId)!.catalogId).toBe(four.catalogId);
		expect(eventGalaxies(w.eventId).total).toBe(0);
		const outside = claimsOutsideRanking(w.eventId);
		// Open and finished claims are shown, not hidden; the released one is not held.
		expect(outside.map((c) => c.id).sort()).toEqual([open, done, field].sort());
		const openRow = outside.find((c) => c.id === open)!;
		expect(openRow).toMatchObject({ state: 'claimed', label: ranked[0].name, catalogName: 'Near galaxies', teamName: 'Canaria (test)', telescopeName: 'Tenaz 2.0 m' });
		expect(openRow.raDeg).toBeCloseTo(ranked[0].ra, 9);
		// The claim itself is untouched.
		expect(db.select().from(table.claim).where(eq(table.claim.id, open)).get()!.state).toBe('claimed');
		const view = eventCatalogView(w.eventId)!;
		expect(view).toMatchObject({ reranking: false, lastSwitch: { fromId: w.nearId, fromName: 'Near galaxies', toId: four.catalogId, by: 'Cora Coordinator' } });
		const switched = log.filter((m) => m.type === 'targets.catalog-switched');
		expect(switched.map((m) => m.room)).toEqual(['board', `event:${w.eventId}`]);

		// Switching back restores the ranking, and the claims are inside it again.
		switchEventCatalog(w.coordinator, w.eventId, w.nearId, { confirmed: true });
		await targetsIdle();
		expect(eventGalaxies(w.eventId, { limit: 5 }).galaxies.map((g) => g.name)).toEqual(ranked.map((g) => g.name));
		expect(claimsOutsideRanking(w.eventId).map((c) => c.id)).toEqual([field]);
	}, 60_000);

	it('refuses an unknown or unready catalogue and the one in use; a retracted event switches without asking', async () => {
		expect.hasAssertions();
		const w = await world();
		const refused = (id: string) => {
			try {
				switchEventCatalog(w.coordinator, w.eventId, id, { confirmed: true });
			} catch (e) {
				return e as DomainError;
			}
			throw new Error('not refused');
		};
		expect(refused('nope')).toMatchObject({ status: 404 });
		expect(refused(w.nearId)).toMatchObject({ status: 409, message: expect.stringContaining('already ranked against "Near galaxies"') });
		const bad = await importCatalog(SYSTEM, { name: 'Broken' }, ['id,ra,dec,distance\nX,400,0,1\n']);
		expect(refused(bad.catalogId)).toMatchObject({ status: 422, message: expect.stringContaining('not ready') });
		expect(() => switchEventCatalog(w.coordinator, 'no-event', w.nearId, { confirmed: true })).toThrow(/No event/);

		const four = await importCatalog(SYSTEM, { name: 'Four test galaxies' }, [FOUR]);
		db.update(table.gwEvent).set({ state: 'retracted', retractedAt: new Date() }).where(eq(table.gwEvent.id, w.eventId)).run();
		expect(switchEventCatalog(w.coordinator, w.eventId, four.catalogId, { confirmed: false }).switched).toBe(true);
		await targetsIdle();
		expect(targetsMeta(w.eventId)!.catalogId).toBe(four.catalogId);
	}, 60_000);
});
