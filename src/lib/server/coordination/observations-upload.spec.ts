/**
 * A large CSV upload of pointings: 9,000 rows from one observer (the size that once held every other
 * request for 14 s). Checks that it is stored as one thing that happened (one live message, one
 * event-log row, the coverage computed once afterwards) and that it changes nothing in the figures:
 * the event's coverage equals the one computed from scratch, and the one the same pointings give
 * when reported one by one.
 */
import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { saveFile, useStorageRoot } from '../platform/storage';
import { loadSessionUser } from '../people/auth';
import { onRecorded, type LiveMessage } from '../platform/realtime';
import * as claims from './claims';
import { parseObservationCsv, report, reportMany } from './observations';
import { clearCoverageCache, eventCoverage, type EventCoverage } from './event-coverage';

const FIX = fileURLToPath(new URL('../../../../tests/fixtures/', import.meta.url));
const MERGER = new Date('2026-12-02T00:00:00Z');
const NOW = new Date('2026-12-02T12:00:00Z');
const ROWS = 9_000;

let storage: string;
beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-upload-'));
	useStorageRoot(storage);
});
afterAll(() => {
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
});
beforeEach(() => clearCoverageCache());

/** One team, one 1° × 1° telescope, an observer, an event with tests/fixtures/sky/moc_map.fits as its map. */
function world() {
	createTestDatabase();
	db.insert(table.team).values({ id: 'team-a', name: 'Test Ridge', region: 'Test' }).run();
	db.insert(table.telescope)
		.values({
			id: 'tel-a',
			teamId: 'team-a',
			name: 'Scope A',
			siteName: 'Test site',
			latitudeDeg: -30,
			longitudeDeg: -70,
			elevationM: 2000,
			apertureM: 1,
			fovShape: 'rectangle',
			fovWidthDeg: 1,
			fovHeightDeg: 1,
			filters: ['g', 'r'],
			limitingMag: 21,
			limitingMagExposureS: 60
		})
		.run();
	db.insert(table.user).values({ id: 'obs-1', email: 'obs@upload.test', name: 'Uma Uploader', passwordHash: 'unused' }).run();
	db.insert(table.userRole).values({ userId: 'obs-1', role: 'observer' }).run();
	db.insert(table.teamMember).values({ teamId: 'team-a', userId: 'obs-1' }).run();
	db.insert(table.gwEvent).values({ id: 'ev-1', sourceEventId: 'S-upload-1', role: 'observation', state: 'active', eventTime: MERGER }).run();
	db.insert(table.notice).values({ id: 'n-1', eventId: 'ev-1', ivorn: 'ivo://test/upload#1', kind: 'initial', role: 'observation', authoredAt: MERGER, citations: [], parsed: {} }).run();
	const file = saveFile('skymaps', 'moc_map.fits', new Uint8Array(readFileSync(FIX + 'sky/moc_map.fits')));
	db.insert(table.skymap).values({ id: 'map-1', eventId: 'ev-1', noticeId: 'n-1', filePath: file.path }).run();
	db.update(table.gwEvent).set({ latestSkymapId: 'map-1' }).run();
	db.insert(table.catalog).values({ id: 'cat-1', name: 'cat', synthetic: true, columns: {}, state: 'ready' }).run();
	const galaxy = db.insert(table.galaxy).values({ catalogId: 'cat-1', row: 0, name: 'G1', raDeg: 150.2, decDeg: -30.1, distanceMpc: 80, distanceErrMpc: 8, weight: 1, pixel: 0 }).returning().get();
	const observer = loadSessionUser('obs-1')!;
	const claim = claims.claim(observer, { eventId: 'ev-1', targetKind: 'galaxy', targetId: String(galaxy.id), telescopeId: 'tel-a' }, MERGER);
	return { observer, claimId: claim.id };
}

/**
 * 9,000 pointings: a 90 × 100 grid of 0.8° steps around RA 150°, Dec −30° (where the test map holds
 * its probability; some tiles overlap the galaxy claim's position), four seconds apart, with a
 * quoted note holding a comma. Just under 1 MB, like the upload that was measured.
 */
function pointingsCsv(): string {
	const lines = ['observed_at,ra_deg,dec_deg,filter,exposure_s,limiting_mag,seeing_arcsec,notes'];
	for (let i = 0; i < ROWS; i++) {
		const at = new Date(MERGER.getTime() + 3_600_000 + i * 4_000).toISOString();
		const ra = 150 + ((i % 90) - 45) * 0.8;
		const dec = -30 + (Math.floor(i / 90) - 50) * 0.4;
		lines.push(`${at},${ra.toFixed(4)},${dec.toFixed(4)},${i % 3 ? 'r' : 'g'},60,20.5,1.2,"grid tile ${i}, first pass, clear and steady"`);
	}
	return lines.join('\n') + '\n';
}

/** The figures of a coverage that must not depend on how the pointings arrived. */
function figures(c: EventCoverage) {
	return {
		observations: c.observations,
		union: c.union,
		errorBound: c.errorBound,
		sumOfFootprints: c.sumOfFootprints,
		curve: c.curve,
		teams: c.teams.map((t) => ({ teamId: t.teamId, observations: t.observations, union: t.union, curve: t.curve })),
		footprints: c.footprints.map((f) => [f.raDeg, f.decDeg, f.observedAt, f.filter, f.probability])
	};
}

describe('a 9,000-row pointing upload', () => {
	it('is stored with one live message and one event-log row, and its coverage is computed once and equals a fresh computation', async () => {
		expect.hasAssertions();
		const { observer, claimId } = world();
		const text = pointingsCsv();
		expect(text.length).toBeGreaterThan(900_000);
		expect(text.length).toBeLessThan(1_000_000);
		const heard: LiveMessage[] = [];
		const off = onRecorded((m) => heard.push(m));
		const logBefore = db.select().from(table.eventLog).all().length;
		const started = performance.now();
		const parsed = await parseObservationCsv(text);
		expect(parsed.errors).toEqual([]);
		const out = await reportMany({ user: observer }, parsed.rows.map((r) => ({ ...r, eventId: 'ev-1', telescopeId: 'tel-a' })), 'csv', { lines: parsed.lines, now: NOW });
		const storeMs = performance.now() - started;
		off();
		expect(out.errors).toEqual([]);
		expect(out.results).toHaveLength(ROWS);
		expect(db.select().from(table.observation).all()).toHaveLength(ROWS);

		// One message for the upload: no per-row observation.reported, and the claim it completed is in it.
		expect(heard.map((m) => m.type)).toEqual(['observation.uploaded']);
		expect(db.select().from(table.eventLog).all().length - logBefore).toBe(1);
		const payload = heard[0].payload as { count: number; completed: { observationId: string; claimIds: string[] }[]; firstObservedAt: string; lastObservedAt: string };
		expect(payload.count).toBe(ROWS);
		expect(payload.completed).toHaveLength(1);
		expect(payload.completed[0].claimIds).toEqual([claimId]);
		expect(claims.getClaim(claimId)?.state).toBe('done');
		expect(out.results.flatMap((r) => r.completedClaimIds)).toEqual([claimId]);
		expect(payload.firstObservedAt).toBe('2026-12-02T01:00:00.000Z');

		// Coverage: computed at the first page load after the upload, then served from the cache.
		const first = (await eventCoverage('ev-1'))!;
		expect(first.observations).toBe(ROWS);
		expect(await eventCoverage('ev-1')).toBe(first);
		expect(first.union).toBeGreaterThan(0);
		// From scratch (cache dropped, map read again): the same numbers.
		clearCoverageCache();
		const fresh = (await eventCoverage('ev-1'))!;
		expect(fresh).not.toBe(first);
		expect(figures(fresh)).toEqual(figures(first));
		console.log(`9,000-row upload: parse + store ${storeMs.toFixed(0)} ms; coverage of 9,000 footprints ${first.computeMs.toFixed(0)} ms`);
	}, 120_000);

	it('is stored a chunk at a time, and a failure in a later chunk takes back what the earlier ones stored', async () => {
		expect.hasAssertions();
		const { observer, claimId } = world();
		const claimBefore = claims.getClaim(claimId)!;
		expect(claimBefore.state).toBe('claimed');
		const parsed = await parseObservationCsv(pointingsCsv());
		// The database refuses the 5,001st pointing (as a full disk would), well after the first chunks were committed.
		db.$client.exec(
			"CREATE TRIGGER test_disk_full BEFORE INSERT ON observation WHEN (SELECT max(rowid) FROM observation) >= 5000 BEGIN SELECT RAISE(ABORT, 'database or disk is full'); END"
		);
		const heard: LiveMessage[] = [];
		const off = onRecorded((m) => heard.push(m));
		let turns = 0;
		const ticker = setInterval(() => turns++, 0);
		await expect(reportMany({ user: observer }, parsed.rows.map((r) => ({ ...r, eventId: 'ev-1', telescopeId: 'tel-a' })), 'csv', { lines: parsed.lines, now: NOW })).rejects.toThrow(
			'database or disk is full'
		);
		clearInterval(ticker);
		off();
		// Other work ran between the chunks…
		expect(turns).toBeGreaterThan(0);
		// …and nothing of the upload is left: no pointing, the claim as it was, no message.
		expect(db.select().from(table.observation).all()).toHaveLength(0);
		const claimAfter = claims.getClaim(claimId)!;
		expect([claimAfter.state, claimAfter.doneAt]).toEqual([claimBefore.state, claimBefore.doneAt]);
		expect(heard.filter((m) => m.type.startsWith('observation.'))).toEqual([]);
	}, 120_000);

	it('gives the same pointings, claims and coverage as the same rows reported one by one', async () => {
		expect.hasAssertions();
		const text = pointingsCsv().split('\n').slice(0, 1 + 600).join('\n');
		const parsed = await parseObservationCsv(text);
		expect(parsed.errors).toEqual([]);
		const rows = parsed.rows.map((r) => ({ ...r, eventId: 'ev-1', telescopeId: 'tel-a' }));

		const one = world();
		for (const r of rows) report({ user: one.observer }, r, 'csv', NOW);
		const byRow = figures((await eventCoverage('ev-1'))!);
		const byRowClaim = claims.getClaim(one.claimId);
		const byRowLog = db.select().from(table.eventLog).all().filter((m) => m.action.startsWith('observation.')).length;

		clearCoverageCache();
		const many = world();
		await reportMany({ user: many.observer }, rows, 'csv', { lines: parsed.lines, now: NOW });
		const batched = figures((await eventCoverage('ev-1'))!);
		expect(batched).toEqual(byRow);
		expect(claims.getClaim(many.claimId)?.state).toBe(byRowClaim?.state);
		expect(byRowLog).toBe(600);
		expect(db.select().from(table.eventLog).all().filter((m) => m.action.startsWith('observation.')).length).toBe(1);
	}, 120_000);
});
