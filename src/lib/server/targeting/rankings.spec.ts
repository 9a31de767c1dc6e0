import { createReadStream, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, afterEach, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { asc, eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import * as table from '../platform/db/schema';
import { onRecorded, SYSTEM, type LiveMessage } from '../platform/realtime';
import { saveUpload, useStorageRoot } from '../platform/storage';
import { commitNotice, processInbox } from '../alerts/ingest';
import { importCatalog } from './catalogs';
import { createTeam } from '../people/teams';
import { createTelescope } from '../people/telescopes';
import { clearTargetCaches, eventFields, eventFieldsPage, eventGalaxies, fieldsResponse, galaxiesResponse, installTargets, rankEvent, targetsIdle, targetsMeta } from './rankings';
import { DEMO_TELESCOPES } from '../../../../seeds/scenario';
import { isWideField } from '../../targeting/telescope.ts';
import { conditionalCdf, conditionalMoments, credibleRegions, pixelAt, readSkyMap } from '../../sky/index';
import type { DB } from '../platform/db';

const FIX = fileURLToPath(new URL('../../../../tests/fixtures/', import.meta.url));
/**
 * Brute-force ranking of the 20k synthetic catalogue in moc_map.fits at 99% by
 * tests/fixtures/targeting/make_reference.py (numpy/healpy/scipy, versions in VERSIONS.md there).
 */
const reference = JSON.parse(readFileSync(FIX + 'targeting/reference_ranking.json', 'utf8')) as {
	candidates: number;
	top: { id: string; score: number; probability: number }[];
};
const mocMap = readFileSync(FIX + 'sky/moc_map.fits');
const demoMap = readFileSync(FIX + 'notices/skymap-demo.multiorder.fits.gz');
const notice = (name: string) => readFileSync(FIX + 'notices/' + name, 'utf8');

let database: DB;
let storage: string;
let log: LiveMessage[];
let stop: (() => void)[] = [];
let catalogId: string;
const scopes: Record<string, string> = {};

beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-targets-'));
	useStorageRoot(storage);
});
afterAll(() => {
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
});

beforeEach(async () => {
	database = createTestDatabase();
	clearTargetCaches();
	log = [];
	stop = [onRecorded((m) => log.push(m)), installTargets()];
	const teamId = createTeam(SYSTEM, { name: 'Test team', region: 'nowhere', description: '' });
	// Two wide fields (2.2° and 3.0° squares) and one narrow (0.15°).
	for (const name of ['Pardo Wide 0.3 m', 'Karoo Schmidt 1.0 m', 'Tenaz 2.0 m']) {
		const { team: _team, ...t } = DEMO_TELESCOPES.find((x) => x.name === name)!;
		void _team;
		scopes[name] = createTelescope(SYSTEM, { ...t, teamId });
	}
	const out = await importCatalog(SYSTEM, { name: 'synthetic 20k', synthetic: true }, createReadStream(FIX + 'targeting/synthetic_catalog_20k.csv', { highWaterMark: 64 * 1024 }));
	expect(out.state).toBe('ready');
	catalogId = out.catalogId;
	await targetsIdle();
	log = [];
}, 60_000);
afterEach(() => {
	for (const s of stop) s();
});

/** Ingest a fixture notice with a sky-map file uploaded beside it, as the upload page does. */
async function ingestWithMap(xml: string, map: Buffer) {
	const c = commitNotice(xml, 'upload', { uploadedSkymapPath: saveUpload(new Uint8Array(map)).path });
	const r = await processInbox(c.inboxId);
	await targetsIdle();
	return r;
}

describe('targets: ranking after skymap.analysed', () => {
	it('stores the ranked galaxies of the 99% region, matching the healpy/numpy reference, and fields for wide telescopes only', async () => {
		expect.hasAssertions();
		const r = await ingestWithMap(notice('bns-initial.xml'), mocMap);
		const eventId = r.eventId!;
		const skymapId = database.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get()!.latestSkymapId!;

		const stored = database.select().from(table.eventGalaxy).where(eq(table.eventGalaxy.eventId, eventId)).orderBy(asc(table.eventGalaxy.rank)).all();
		expect(stored.length).toBe(reference.candidates);
		expect(stored.every((g) => g.skymapId === skymapId)).toBe(true);
		const { galaxies } = eventGalaxies(eventId, { limit: 100 });
		for (let k = 0; k < 100; k++) {
			// Ties of equal score may swap; the reference has none among its top 100 at 1e-12.
			expect(galaxies[k].name, `rank ${k + 1}`).toBe(reference.top[k].id);
			expect(Math.abs(galaxies[k].probability - reference.top[k].probability)).toBeLessThan(1e-6);
			expect(Math.abs(galaxies[k].score / reference.top[k].score - 1)).toBeLessThan(1e-9);
		}
		// Cumulative probability is the running sum of the normalised ones and reaches 1 at the last candidate.
		let sum = 0;
		for (const g of stored) {
			sum += g.probability;
			expect(g.cumulative).toBeCloseTo(Math.min(1, sum), 12);
		}
		expect(stored.at(-1)!.cumulative).toBeCloseTo(1, 9);

		const meta = targetsMeta(eventId)!;
		expect(meta).toMatchObject({ skymapId, catalogId, mode: '3d', candidates: reference.candidates, level: 0.99 });
		expect(meta.catalog).toMatchObject({ id: catalogId, synthetic: true, rowCount: 20_000 });

		// Fields: the two wide telescopes have them, the narrow one none.
		expect(isWideField(database.select().from(table.telescope).where(eq(table.telescope.id, scopes['Tenaz 2.0 m'])).get()!)).toBe(false);
		expect(eventFields(eventId, scopes['Tenaz 2.0 m'])).toEqual([]);
		const map = readSkyMap(new Uint8Array(mocMap));
		const [r99] = credibleRegions(map, [0.99]);
		for (const name of ['Pardo Wide 0.3 m', 'Karoo Schmidt 1.0 m']) {
			const fields = eventFields(eventId, scopes[name]);
			expect(fields.length, name).toBeGreaterThan(0);
			expect(fields.map((f) => f.rank)).toEqual(fields.map((_, i) => i + 1));
			for (let i = 1; i < fields.length; i++) {
				expect(fields[i].probability).toBeLessThanOrEqual(fields[i - 1].probability);
				expect(fields[i].cumulative).toBeGreaterThanOrEqual(fields[i - 1].cumulative);
			}
			// Stored until the union reaches 99% or 300 fields; only the 99% region is evaluated, so the union stays below 1.
			const last = fields.at(-1)!.cumulative;
			expect(last).toBeLessThan(1);
			expect(fields.length === 300 || last >= 0.99).toBe(true);
			// Covering a 1370 deg² region takes more fields than region area / field area (9 deg² for 3°).
			expect(fields.length).toBeGreaterThan(r99.areaDeg2 / 9);
		}
		const ranked = log.filter((m) => m.type === 'targets.ranked');
		expect(ranked.map((m) => m.room)).toEqual(['board', `event:${eventId}`]);
		expect(ranked[0].payload).toMatchObject({ eventId, skymapId, galaxies: reference.candidates });
	}, 120_000);

	it('re-ranks when an update brings a new map and replaces the old ranking', async () => {
		expect.hasAssertions();
		const first = await ingestWithMap(notice('bns-initial.xml'), mocMap);
		const eventId = first.eventId!;
		const before = eventGalaxies(eventId, { limit: 5 }).galaxies.map((g) => g.name);
		const firstMap = targetsMeta(eventId)!.skymapId;
		// The update (authored later, supersedes the initial) comes with the 1.2° demo map at RA 197.9°, Dec −23.3°.
		await ingestWithMap(notice('bns-update.xml'), demoMap);
		const event = database.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get()!;
		expect(event.latestSkymapId).not.toBe(firstMap);
		const rows = database.select().from(table.eventGalaxy).where(eq(table.eventGalaxy.eventId, eventId)).all();
		expect(rows.length).toBeGreaterThan(0);
		expect(rows.every((g) => g.skymapId === event.latestSkymapId)).toBe(true);
		expect(database.select().from(table.eventField).where(eq(table.eventField.eventId, eventId)).all().every((f) => f.skymapId === event.latestSkymapId)).toBe(true);
		expect(targetsMeta(eventId)!.skymapId).toBe(event.latestSkymapId);
		// Every galaxy of the new ranking lies near the new map's peak (a 1.2° blob: its 99% region is a few degrees across).
		const { galaxies } = eventGalaxies(eventId, { limit: 2000 });
		const sep = (g: { ra: number; dec: number }) => {
			const d = Math.PI / 180;
			const c = Math.sin(g.dec * d) * Math.sin(-23.3 * d) + Math.cos(g.dec * d) * Math.cos(-23.3 * d) * Math.cos((g.ra - 197.9) * d);
			return Math.acos(Math.min(1, c)) / d;
		};
		expect(Math.max(...galaxies.map(sep))).toBeLessThan(6);
		expect(galaxies.slice(0, 5).map((g) => g.name)).not.toEqual(before);
		expect(galaxies.length).toBe(rows.length);
		expect(log.filter((m) => m.type === 'targets.ranked' && m.room === 'board')).toHaveLength(2);
	}, 120_000);

	it('stores with each ranked galaxy how consistent its catalogued distance is with the map there (two-sided tail probability)', async () => {
		expect.hasAssertions();
		const r = await ingestWithMap(notice('bns-update.xml'), demoMap);
		const { galaxies } = eventGalaxies(r.eventId!, { limit: 2000 });
		expect(galaxies.length).toBeGreaterThan(10);
		const map = readSkyMap(new Uint8Array(demoMap));
		let far = 0;
		for (const g of galaxies) {
			const i = pixelAt(map, g.ra, g.dec);
			const cdf = conditionalCdf(g.distance, map.distMu![i], map.distSigma![i])!;
			expect(g.distancePValue).not.toBeNull();
			expect(Math.abs(g.distancePValue! - 2 * Math.min(cdf, 1 - cdf))).toBeLessThan(1e-9);
			// More than three conditional standard deviations away: well below 0.01.
			const c = conditionalMoments(map.distMu![i], map.distSigma![i])!;
			if (Math.abs(g.distance - c.meanMpc) > 3 * c.stdMpc) {
				far++;
				expect(g.distancePValue!).toBeLessThan(0.01);
			}
		}
		expect(far).toBeGreaterThan(0);
	}, 120_000);

	it('keeps the current ranking when a late map for an older notice is analysed, and ranks in 2-D maps without a catalogue as fields only', async () => {
		expect.hasAssertions();
		const r = await ingestWithMap(notice('bns-update.xml'), demoMap);
		const eventId = r.eventId!;
		const current = targetsMeta(eventId)!.skymapId;
		// The initial notice arrives after the update (authored earlier): the event keeps showing the update's map.
		await ingestWithMap(notice('bns-initial.xml'), mocMap);
		expect(targetsMeta(eventId)!.skymapId).toBe(current);
		// Without a catalogue the fields are still ranked.
		const summary = (await rankEvent(eventId, { catalogId: null }))!;
		expect(summary.galaxies).toBe(0);
		expect(Object.values(summary.fields).every((n) => n > 0)).toBe(true);
		expect(eventGalaxies(eventId).total).toBe(0);
	}, 120_000);
});

describe('targets: API shapes', () => {
	it('galaxies: { galaxies: [{ rank, galaxyId, name, ra, dec, distance, score, probability, cumulative }] }; fields per telescope', async () => {
		expect.hasAssertions();
		const r = await ingestWithMap(notice('bns-update.xml'), demoMap);
		const body = galaxiesResponse(r.eventId!, 3);
		expect(body.galaxies).toHaveLength(3);
		for (const g of body.galaxies) {
			expect(Object.keys(g).sort()).toEqual(['cumulative', 'dec', 'distance', 'galaxyId', 'name', 'probability', 'ra', 'rank', 'score'].sort());
			const row = database.select().from(table.galaxy).where(eq(table.galaxy.id, g.galaxyId)).get()!;
			expect(row).toMatchObject({ name: g.name, raDeg: g.ra, decDeg: g.dec, distanceMpc: g.distance, catalogId });
		}
		expect(body.galaxies.map((g) => g.rank)).toEqual([1, 2, 3]);
		expect(body.catalog).toMatchObject({ id: catalogId, synthetic: true });
		const wide = scopes['Karoo Schmidt 1.0 m'];
		const fields = fieldsResponse(r.eventId!, wide);
		expect(fields.fields.length).toBeGreaterThan(0);
		expect(fields.fields.every((f) => f.telescopeId === wide)).toBe(true);
		expect(Object.keys(fields.fields[0]).sort()).toEqual(['cumulative', 'dec', 'fieldId', 'probability', 'ra', 'rank', 'telescopeId'].sort());
		expect(fields.fields[0].fieldId).toMatch(/^W3\.0x3\.0-R\d+-F\d+$/);
		expect(fieldsResponse(r.eventId!, null).fields.length).toBeGreaterThan(fields.fields.length);
		// Sorting by distance pages through the same set.
		const byDistance = eventGalaxies(r.eventId!, { sort: 'distance', dir: 'asc', limit: 2000 }).galaxies;
		for (let i = 1; i < byDistance.length; i++) expect(byDistance[i].distance).toBeGreaterThanOrEqual(byDistance[i - 1].distance);
	}, 120_000);
});

describe('targets: the network plan over the stored rankings', () => {
	it('gives narrow telescopes galaxies and wide ones their own fields, each target once', async () => {
		expect.hasAssertions();
		const { networkPlan } = await import('./visibility-view');
		const r = await ingestWithMap(notice('bns-update.xml'), demoMap);
		const started = performance.now();
		// 2030-04-12 18:00 UTC: night in South Africa (Karoo) and, later, Chile.
		const { plan } = await networkPlan(r.eventId!, new Date('2030-04-12T18:00:00Z'));
		const ms = performance.now() - started;
		const galaxyIds = new Set(eventGalaxies(r.eventId!, { limit: 300 }).galaxies.map((g) => `G${g.galaxyId}`));
		const seen = new Set<string>();
		let assigned = 0;
		for (const t of plan.telescopes) {
			const wide = t.telescopeId !== scopes['Tenaz 2.0 m'];
			for (const a of t.assignments) {
				assigned++;
				expect(seen.has(a.targetId), a.targetId).toBe(false);
				seen.add(a.targetId);
				if (wide) expect(a.targetId.startsWith(`${t.telescopeId}:`), `${t.name} ${a.targetId}`).toBe(true);
				else expect(galaxyIds.has(a.targetId), a.targetId).toBe(true);
			}
		}
		expect(assigned).toBeGreaterThan(0);
		expect(plan.coverage.length).toBeGreaterThan(0);
		for (let i = 1; i < plan.coverage.length; i++) expect(plan.coverage[i].probability).toBeGreaterThanOrEqual(plan.coverage[i - 1].probability);
		console.log(`network plan: ${assigned} exposures over ${plan.telescopes.length} telescopes in ${ms.toFixed(0)} ms`);
	}, 120_000);

	it('expects the union of the planned footprints, never more sky than the map holds', async () => {
		expect.hasAssertions();
		const { networkPlan, planCoverage } = await import('./visibility-view');
		const r = await ingestWithMap(notice('bns-update.xml'), demoMap);
		const { plan, telescopes } = await networkPlan(r.eventId!, new Date('2030-04-12T18:00:00Z'));
		const covered = (await planCoverage(r.eventId!, plan, telescopes))!;
		// Overlapping fields of different tilings make the plain sum of target probabilities larger
		// than the union; the union can never pass the map's total.
		const summed = plan.telescopes.flatMap((t) => t.assignments).filter((a) => a.kind === 'field').reduce((s, a) => s + a.probability, 0);
		expect(covered.skyTotal).toBeGreaterThan(0);
		expect(covered.skyTotal).toBeLessThanOrEqual(1 + covered.skyErrorBound);
		expect(covered.skyTotal).toBeLessThan(summed);
		for (let i = 1; i < covered.sky.length; i++) expect(covered.sky[i].probability).toBeGreaterThanOrEqual(covered.sky[i - 1].probability);
		expect(covered.sky.at(-1)!.probability).toBeCloseTo(covered.skyTotal, 12);
		expect(covered.galaxyTotal).toBeLessThanOrEqual(1 + 1e-9);
		for (let i = 1; i < covered.galaxies.length; i++) expect(covered.galaxies[i].probability).toBeGreaterThanOrEqual(covered.galaxies[i - 1].probability);
	}, 120_000);
});

describe('targets: filtered paging on the read side', () => {
	it('applies a sky test after the database order and pages the rows it keeps; fields page like the full list', async () => {
		expect.hasAssertions();
		const r = await ingestWithMap(notice('bns-initial.xml'), mocMap);
		const eventId = r.eventId!;
		const all = eventGalaxies(eventId, { sort: 'dec', dir: 'desc', limit: 2000 });
		// Keep the galaxies south of −30°: the same rows, in the same order, as filtering the full list.
		const south = (_ra: Float64Array, dec: Float64Array) => Uint8Array.from(dec, (d) => (d < -30 ? 1 : 0));
		const expected = all.galaxies.filter((g) => g.dec < -30);
		expect(expected.length).toBeGreaterThan(10);
		expect(expected.length).toBeLessThan(all.total);
		const second = eventGalaxies(eventId, { sort: 'dec', dir: 'desc', offset: 10, limit: 10, filter: { sky: south } });
		expect(second.total).toBe(expected.length);
		expect(second.stored).toBe(all.total);
		expect(second.galaxies.map((g) => g.rank)).toEqual(expected.slice(10, 20).map((g) => g.rank));

		const wide = scopes['Karoo Schmidt 1.0 m'];
		const full = eventFields(eventId, wide);
		const page = eventFieldsPage(eventId, wide, { offset: 25, limit: 25 });
		expect(page.total).toBe(full.length);
		expect(page.rows).toEqual(full.slice(25, 50));
		const byRa = eventFieldsPage(eventId, wide, { sort: 'ra', limit: 300 }).rows.map((f) => f.ra);
		expect(byRa).toEqual([...byRa].sort((a, b) => a - b));
	}, 120_000);
});

describe('targets: a ranking lost in a crash is made again', () => {
	const rankingOf = (eventId: string) => ({
		meta: database.select().from(table.eventTargetsMeta).where(eq(table.eventTargetsMeta.eventId, eventId)).get() ?? null,
		galaxies: database.select().from(table.eventGalaxy).where(eq(table.eventGalaxy.eventId, eventId)).all().length,
		fields: database.select().from(table.eventField).where(eq(table.eventField.eventId, eventId)).all().length
	});

	it('on start: an event with an analysed map and no ranking (the process stopped before ranking it) is ranked', async () => {
		expect.hasAssertions();
		// The state a kill right after the notice's 201 leaves: event and analysed map stored, ranking never made.
		for (const s of stop) s();
		stop = [onRecorded((m) => log.push(m))];
		const r = await ingestWithMap(notice('bns-update.xml'), demoMap);
		const eventId = r.eventId!;
		const skymapId = database.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get()!.latestSkymapId!;
		expect(skymapId).toBeTruthy();
		expect(rankingOf(eventId)).toEqual({ meta: null, galaxies: 0, fields: 0 });

		// Start-up (hooks.server.ts `init` installs the ranking job).
		stop.push(installTargets());
		await targetsIdle();
		const after = rankingOf(eventId);
		expect(after.meta).toMatchObject({ skymapId, catalogId });
		expect(after.galaxies).toBeGreaterThan(0);
		expect(after.fields).toBeGreaterThan(0);
		expect(log.filter((m) => m.type === 'targets.ranked' && m.room === 'board').map((m) => (m.payload as { eventId: string }).eventId)).toEqual([eventId]);
		// Installing again finds nothing missing and ranks nothing twice.
		stop.push(installTargets());
		await targetsIdle();
		expect(log.filter((m) => m.type === 'targets.ranked' && m.room === 'board')).toHaveLength(1);
	}, 120_000);

	it('after each processed notice: any other event whose current map lost its ranking is ranked again', async () => {
		expect.hasAssertions();
		const first = (await ingestWithMap(notice('bns-update.xml'), demoMap)).eventId!;
		expect(rankingOf(first).galaxies).toBeGreaterThan(0);
		// The ranking is lost (a failed job, a crash inside it): nothing else would ever redo it.
		database.delete(table.eventTargetsMeta).where(eq(table.eventTargetsMeta.eventId, first)).run();
		database.delete(table.eventGalaxy).where(eq(table.eventGalaxy.eventId, first)).run();
		database.delete(table.eventField).where(eq(table.eventField.eventId, first)).run();
		log = [];
		// Another event's notice arrives (a black-hole merger without a usable map here).
		const c = commitNotice(notice('bbh-initial.xml'), 'upload');
		await processInbox(c.inboxId, { fetch: { allowedHosts: ['127.0.0.1'], timeoutMs: 500 } });
		await targetsIdle();
		expect(rankingOf(first).meta).toMatchObject({ catalogId });
		expect(rankingOf(first).galaxies).toBeGreaterThan(0);
		expect(log.filter((m) => m.type === 'targets.ranked' && m.room === 'board').map((m) => (m.payload as { eventId: string }).eventId)).toEqual([first]);
	}, 120_000);
});
