import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../platform/testing/database';
import { useStorageRoot } from '../platform/storage';
import { stopFakeSmtp } from '../platform/fake-smtp';
import * as claims from '../coordination/claims';
import { report } from '../coordination/observations';
import { addPhotometryCsv } from '../candidates/photometry';
import { clearVettingCache, vettingIdle } from '../candidates/vetting';
import { giveGalaxies, NOW, world, type World } from '../candidates/testing';
import { eventExport, exportCsv, exportFileName, exportJson } from './export';
import { closeEvent } from './close';
import { EXPORT_KINDS } from '../../event-view.ts';

let storage: string;
let w: World;

beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-export-'));
	useStorageRoot(storage);
});
afterAll(async () => {
	await vettingIdle();
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
	await stopFakeSmtp();
});

/**
 * The CSV read back by Python's csv module (the reference RFC 4180 reader of Debian's python3),
 * as a list of rows of strings, header first.
 */
function readWithPython(csv: string): string[][] {
	const out = execFileSync('/usr/bin/python3', ['-c', 'import csv, io, json, sys; print(json.dumps(list(csv.reader(io.StringIO(sys.stdin.read(), newline="")))))'], { input: csv, encoding: 'utf8' });
	return JSON.parse(out);
}

/** A note with everything a CSV writer gets wrong: comma, quotes, a line break, and a formula start. */
const AWKWARD_NOTE = 'Clouds at 23:05, "thin"\nseeing poor';
const FORMULA_NOTE = '=HYPERLINK("http://example.invalid")';

beforeEach(async () => {
	createTestDatabase();
	clearVettingCache();
	w = world();
	const [g1, g2] = giveGalaxies(w.eventId, w.skymapId, [
		{ name: 'NGC-test-1', raDeg: 150.2, decDeg: -29.9, distanceMpc: 160 },
		{ name: 'NGC-test-2', raDeg: 170.5, decDeg: -10.25, distanceMpc: 150 }
	]);
	claims.claim(w.observer, { eventId: w.eventId, targetKind: 'galaxy', targetId: String(g1), telescopeId: w.telescopeId, filter: 'r', note: AWKWARD_NOTE }, NOW);
	claims.claim(w.observer, { eventId: w.eventId, targetKind: 'galaxy', targetId: String(g2), telescopeId: w.telescopeId }, new Date(NOW.getTime() + 1000));
	report({ user: w.observer }, { eventId: w.eventId, telescopeId: w.telescopeId, observedAt: '2026-12-08T23:00:00.250Z', raDeg: 150.2, decDeg: -29.9, filter: 'r', exposureS: 120, limitingMag: 20.5, notes: AWKWARD_NOTE }, 'form', NOW);
	report({ user: w.observer }, { eventId: w.eventId, telescopeId: w.telescopeId, observedAt: '2026-12-08T23:30:00Z', raDeg: 10.123456789, decDeg: -45.5, filter: 'g', exposureS: 60, limitingMag: 21.25, seeingArcsec: 1.3, notes: FORMULA_NOTE }, 'api', NOW);
	await addPhotometryCsv({ user: w.observer }, w.candidateId, 'time,filter,mag,mag_err,limit\n2026-12-03T01:00:00Z,r,21.3,0.08,\n2026-12-04T01:00:00Z,r,,,22.4\n', NOW);
});

describe('event exports', () => {
	it('write a header and one row per record, and read back through an independent CSV reader to the same values', () => {
		for (const kind of EXPORT_KINDS) {
			const t = eventExport(w.eventId, kind)!;
			const parsed = readWithPython(exportCsv(t));
			expect(parsed[0], kind).toEqual(t.columns);
			expect(parsed.length - 1, kind).toBe(t.rows.length);
			parsed.slice(1).forEach((cells, i) => {
				t.columns.forEach((col, k) => {
					const v = t.rows[i][col];
					const expected = v === null ? '' : String(v);
					// A formula-like text from people is written with a leading apostrophe (spreadsheetText).
					expect(cells[k] === expected || cells[k] === `'${expected}`, `${kind} row ${i + 1} ${col}: ${cells[k]} vs ${expected}`).toBe(true);
				});
			});
		}
	});

	it('hold what was stored: pointings in time order with their exact numbers, times in ISO 8601 UTC, awkward notes intact', () => {
		const t = eventExport(w.eventId, 'pointings')!;
		expect(t.rows).toHaveLength(2);
		const parsed = readWithPython(exportCsv(t));
		const col = (name: string, row: number) => parsed[row][parsed[0].indexOf(name)];
		expect(col('observed_at', 1)).toBe('2026-12-08T23:00:00.250Z');
		expect(col('notes', 1)).toBe(AWKWARD_NOTE);
		expect(col('ra_deg', 2)).toBe('10.123456789');
		expect(Number(col('limiting_mag', 2))).toBe(21.25);
		expect(col('seeing_arcsec', 1)).toBe('');
		expect(col('seeing_arcsec', 2)).toBe('1.3');
		expect(col('source', 2)).toBe('api');
		expect(col('reported_by', 1)).toBe(w.observer.name);
		// The formula is kept from running in a spreadsheet; the JSON keeps it as typed.
		expect(col('notes', 2)).toBe(`'${FORMULA_NOTE}`);
		expect(t.rows[1].notes).toBe(FORMULA_NOTE);
		for (const row of parsed.slice(1)) for (const c of ['observed_at', 'reported_at']) expect(row[parsed[0].indexOf(c)]).toMatch(/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z$/);
	});

	it('list claims, candidates and photometry (detections and upper limits)', () => {
		const c = eventExport(w.eventId, 'claims')!;
		expect(c.rows.map((r) => r.state)).toEqual(['done', 'claimed']);
		expect(c.rows[0]).toMatchObject({ filter: 'r', note: AWKWARD_NOTE, team: expect.stringContaining('Basalt Ridge'), claimed_by: w.observer.name });
		expect(c.rows[1].filter).toBeNull();
		const cand = eventExport(w.eventId, 'candidates')!;
		expect(cand.rows).toHaveLength(1);
		expect(cand.rows[0]).toMatchObject({ candidate_id: w.candidateId, name: w.candidateName, ra_deg: 150.2, dec_deg: -29.9, filter: 'g' });
		const p = eventExport(w.eventId, 'photometry')!;
		expect(p.rows.map((r) => [r.time, r.filter, r.mag, r.mag_err, r.limit_mag])).toEqual([
			['2026-12-03T01:00:00.000Z', 'r', 21.3, 0.08, null],
			['2026-12-04T01:00:00.000Z', 'r', null, null, 22.4]
		]);
		expect(p.rows.every((r) => r.candidate === w.candidateName)).toBe(true);
	});

	it('are there for closed events too, as JSON with the same columns', () => {
		closeEvent(w.coordinator, w.eventId, { reason: 'search-complete' }, NOW);
		const t = eventExport(w.eventId, 'claims')!;
		expect(t.rows.map((r) => r.state)).toEqual(['done', 'released']);
		const doc = exportJson(w.eventId, t, NOW);
		expect(doc).toMatchObject({ eventId: w.eventId, sourceEventId: w.sourceEventId, kind: 'claims', exportedAt: NOW.toISOString() });
		expect(JSON.parse(JSON.stringify(doc)).rows).toEqual(t.rows);
		expect(Object.keys(doc.rows[0])).toEqual(doc.columns);
	});

	it('are null for an unknown event, and name files safely', () => {
		expect(eventExport('no-such-event', 'pointings')).toBeNull();
		expect(exportFileName('S261202a', 'photometry', 'csv')).toBe('S261202a-photometry.csv');
		expect(exportFileName('S26"1/x', 'claims', 'json')).toBe('S26_1_x-claims.json');
	});
});
