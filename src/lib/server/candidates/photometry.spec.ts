import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { useStorageRoot } from '../platform/storage';
import { stopFakeSmtp } from '../platform/fake-smtp';
import { validateApiToken } from '../people/auth';
import { issueToken } from '../people/tokens';
import { SYSTEM } from '../platform/realtime';
import { CandidateError } from './candidates';
import { addPhotometryCsv, addPhotometryRows, listPhotometry, PhotometryRefused } from './photometry';
import { clearVettingCache, vettingIdle } from './vetting';
import { kilonovaCsv, NOW, world, type World } from './testing';
import { refusalOf } from '../platform/testing/refusal';

let storage: string;
let w: World;

beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-photometry-'));
	useStorageRoot(storage);
});
afterAll(async () => {
	await vettingIdle();
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
	await stopFakeSmtp();
});
beforeEach(() => {
	createTestDatabase();
	clearVettingCache();
	w = world();
});

const stored = () => db.select().from(table.candidatePhotometry).where(eq(table.candidatePhotometry.candidateId, w.candidateId)).all();
const logged = (action: string) => db.select().from(table.eventLog).where(eq(table.eventLog.action, action)).all();

function refusal(f: () => unknown): PhotometryRefused {
	try {
		f();
	} catch (e) {
		if (e instanceof PhotometryRefused) return e;
		throw e;
	}
	throw new Error('expected the photometry to be refused');
}

/** `refusal` for an upload that settles later (a CSV is read on the work pool). */
const refused = (p: Promise<unknown>) => refusalOf(p, PhotometryRefused, 'expected the photometry to be refused');

describe('photometry by CSV', () => {
	it('stores every row of a good file, logs it once, and vets the candidate again', async () => {
		expect.hasAssertions();
		const out = await addPhotometryCsv({ user: w.observer }, w.candidateId, kilonovaCsv(), NOW);
		expect(out.added).toBe(17);
		expect(stored()).toHaveLength(17);
		expect(out.photometry[0]).toMatchObject({ time: '2026-12-02T05:28:05.000Z', filter: 'i', mag: null, limitMag: 22.01, reportedBy: 'Olga Observer', source: 'csv' });
		expect(out.vetting?.recomputed).toBe(true);
		const log = logged('candidate.photometry');
		expect(log).toHaveLength(1);
		expect(log[0].payload).toMatchObject({ candidateId: w.candidateId, added: 17, filters: ['g', 'i', 'r'], detections: 14, upperLimits: 3 });
		expect(log[0].room).toBe(`event:${w.eventId}`);
		await vettingIdle();
	});
	it('refuses the whole file when any line is bad, naming every bad line, and stores nothing', async () => {
		expect.hasAssertions();
		const csv = [
			'time,filter,mag,mag_err,limit',
			'2026-12-02T13:52:05Z,g,21.04,0.07,',
			'2026-12-03T00:40:05Z,g,abc,0.05,',
			'# a comment line still counts for the numbering',
			'2026-12-03T01:08:53Z,r,20.8,,',
			'2026-12-03T12:40:05Z,g,21.9,0.09,'
		].join('\n');
		const e = await refused(addPhotometryCsv({ user: w.observer }, w.candidateId, csv, NOW));
		expect(e.status).toBe(422);
		expect(e.details).toEqual([
			{ line: 3, message: 'magnitude "abc" is not a number' },
			{ line: 5, message: 'a magnitude needs its error (mag_err)' }
		]);
		expect(e.message).toBe('2 problems; nothing stored. The first, line 3: magnitude "abc" is not a number');
		expect(stored()).toHaveLength(0);
		expect(logged('candidate.photometry')).toHaveLength(0);
	});
	it('refuses a repeated upload of the same measurements, and times in the future, by line', async () => {
		expect.hasAssertions();
		await addPhotometryCsv({ user: w.observer }, w.candidateId, kilonovaCsv(), NOW);
		const again = await refused(addPhotometryCsv({ user: w.observer }, w.candidateId, kilonovaCsv(), NOW));
		expect(again.details).toHaveLength(17);
		expect(again.details[1]).toEqual({ line: 3, message: 'a g measurement at 2026-12-02T13:52:05.000Z is already stored for this candidate' });
		const future = await refused(
			addPhotometryCsv({ user: w.observer }, w.candidateId, 'time,filter,mag,mag_err,limit\n2026-12-10T00:00:00Z,r,20,0.1,\n2026-12-10T00:00:00Z,r,20.1,0.1,', NOW)
		);
		expect(future.details).toEqual([
			{ line: 2, message: 'time 2026-12-10T00:00:00.000Z is in the future' },
			{ line: 3, message: 'time 2026-12-10T00:00:00.000Z is in the future' },
			{ line: 3, message: 'repeats the r measurement at 2026-12-10T00:00:00.000Z of line 2' }
		]);
		expect(stored()).toHaveLength(17);
	});
});

describe('photometry by JSON', () => {
	it('stores rows given with the CSV field names and a pointing of the same event', () => {
		expect.hasAssertions();
		const observationId = 'obs-1';
		db.insert(table.observation)
			.values({ id: observationId, eventId: w.eventId, telescopeId: w.telescopeId, teamId: w.teamId, observedAt: new Date('2026-12-03T00:40:05Z'), raDeg: 150, decDeg: -30, filter: 'g', exposureS: 60, limitingMag: 21, source: 'api' })
			.run();
		const out = addPhotometryRows({ user: w.observer }, w.candidateId, {
			rows: [
				{ time: '2026-12-03T00:40:05Z', filter: 'g', mag: 21.3, mag_err: 0.05, observationId },
				{ time: '2026-12-03T01:08:53+01:00', filter: 'r', limit: 22.5 }
			]
		}, NOW);
		expect(out.added).toBe(2);
		expect(listPhotometry(w.candidateId).map((p) => [p.time, p.filter, p.mag, p.limitMag, p.observationId, p.source])).toEqual([
		['2026-12-03T00:08:53.000Z', 'r', null, 22.5, null, 'json'],
			['2026-12-03T00:40:05.000Z', 'g', 21.3, null, observationId, 'json']
		]);
	});
	it('names every bad row and stores none of them', () => {
		expect.hasAssertions();
		const e = refusal(() =>
			addPhotometryRows({ user: w.observer }, w.candidateId, {
				rows: [
					{ time: '2026-12-03T00:40:05Z', filter: 'g', mag: 21.3, mag_err: 0.05 },
					{ time: '2026-12-03 01:08', filter: 'r', mag: 21 },
					{ time: '2026-12-03T02:00:00Z', filter: 'r', limit: 22, colour: 'red' },
					{ time: '2026-12-03T03:00:00Z', filter: 'r', limit: 22, observationId: 'nope' }
				]
			}, NOW)
		);
		expect(e.details).toEqual([
			{ row: 2, message: 'time "2026-12-03 01:08" has no time zone; add Z for UTC (e.g. 2026-12-02T03:04:05Z)' },
			{ row: 2, message: 'a magnitude needs its error (mag_err)' },
			{ row: 3, message: 'unknown field "colour" (expected time, filter, mag, mag_err, limit, observationId)' }
		]);
		expect(stored()).toHaveLength(0);
		const pointing = refusal(() => addPhotometryRows({ user: w.observer }, w.candidateId, { rows: [{ time: '2026-12-03T03:00:00Z', filter: 'r', limit: 22, observationId: 'nope' }] }, NOW));
		expect(pointing.details).toEqual([{ row: 1, message: 'no reported pointing nope' }]);
	});
	it('refuses a body without rows in plain words', () => {
		expect.hasAssertions();
		expect(() => addPhotometryRows({ user: w.observer }, w.candidateId, { points: [] }, NOW)).toThrow(/rows must be a list of measurements/);
		expect(() => addPhotometryRows({ user: w.observer }, w.candidateId, { rows: [] }, NOW)).toThrow(/rows is empty/);
	});
});

describe('who may report photometry, and when', () => {
	it('takes a telescope token and names the telescope as reporter', () => {
		expect.hasAssertions();
		const token = issueToken(SYSTEM, { name: 'robot', telescopeId: w.telescopeId });
		const p = validateApiToken(token.secret)!;
		const out = addPhotometryRows({ user: null, telescopeId: p.telescopeId!, tokenId: p.tokenId }, w.candidateId, { rows: [{ time: '2026-12-03T00:40:05Z', filter: 'g', mag: 21.3, mag_err: 0.05 }] }, NOW);
		expect(out.photometry[0].reportedBy).toMatch(/^telescope Basalt 0\.6 m/);
		expect(logged('candidate.photometry')[0].actorLabel).toMatch(/^telescope Basalt 0\.6 m/);
	});
	it('refuses viewers (403), unknown candidates (404) and a retracted event (409, saying why)', async () => {
		expect.hasAssertions();
		const rows = { rows: [{ time: '2026-12-03T00:40:05Z', filter: 'g', mag: 21.3, mag_err: 0.05 }] };
		expect(() => addPhotometryRows({ user: w.viewer }, w.candidateId, rows, NOW)).toThrow(expect.objectContaining({ status: 403 }));
		expect(() => addPhotometryRows({ user: w.observer }, 'nope', rows, NOW)).toThrow(expect.objectContaining({ status: 404 }));
		db.update(table.gwEvent).set({ state: 'retracted' }).where(eq(table.gwEvent.id, w.eventId)).run();
		let e: unknown;
		try {
			await addPhotometryCsv({ user: w.observer }, w.candidateId, kilonovaCsv(), NOW);
		} catch (x) {
			e = x;
		}
		expect(e).toBeInstanceOf(CandidateError);
		expect(e).toMatchObject({ status: 409, code: 'event_retracted' });
		expect((e as Error).message).toBe(
			`Event ${w.sourceEventId} was retracted by its source; photometry is not taken for its candidates, so that no telescope time goes to a false alert.`
		);
		expect(stored()).toHaveLength(0);
	});
});
