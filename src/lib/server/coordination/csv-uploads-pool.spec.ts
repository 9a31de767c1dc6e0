/**
 * Pointing and photometry CSV uploads are read on the work pool: the server functions the routes
 * call (`parseObservationCsv`, `addPhotometryCsv`) run one pool task each and never call the pure
 * readers on this thread. The readers are wrapped here in counting spies; a worker thread loads its
 * own copy of the modules, so calls made there are not counted. Run inline (`useInlineWork`), the
 * same calls are counted: that case shows the spies see a reader run on this thread.
 */
import { afterAll, beforeEach, describe, expect, it, vi } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { stopWorkPool, useInlineWork, workDone } from '../platform/work-pool';
import { parsePointingCsv } from '../../coordination/pointings.ts';
import { readPhotometryUpload } from '../../candidates/photometry.ts';
import { parseObservationCsv } from './observations';
import { addPhotometryCsv, PhotometryRefused } from '../candidates/photometry';
import { loadSessionUser } from '../people/auth';

vi.mock('../../coordination/pointings.ts', async (importOriginal) => {
	const real = await importOriginal<typeof import('../../coordination/pointings.ts')>();
	return { ...real, parsePointingCsv: vi.fn(real.parsePointingCsv) };
});
vi.mock('../../candidates/photometry.ts', async (importOriginal) => {
	const real = await importOriginal<typeof import('../../candidates/photometry.ts')>();
	return { ...real, readPhotometryUpload: vi.fn(real.readPhotometryUpload) };
});

const NOW = new Date('2026-12-03T12:00:00Z');
const HEADER = 'observed_at,ra_deg,dec_deg,filter,exposure_s,limiting_mag,seeing_arcsec,notes';

/** `rows` pointings, one of them (line `badLine`, if given) with an RA out of range. */
function pointings(rows: number, badLine?: number): string {
	const lines = [HEADER];
	for (let i = 0; i < rows; i++) {
		const at = new Date(Date.parse('2026-12-02T01:00:00Z') + i * 4_000).toISOString();
		const ra = i + 2 === badLine ? 400 : 150 + (i % 90) * 0.1;
		lines.push(`${at},${ra.toFixed(3)},-30,r,60,20.5,1.2,"tile ${i}, clear"`);
	}
	return lines.join('\n') + '\n';
}

/** An event with one candidate and an observer who may report photometry for it. */
function world() {
	createTestDatabase();
	db.insert(table.team).values({ id: 'team-a', name: 'Test Ridge', region: 'Test' }).run();
	db.insert(table.user).values({ id: 'obs-1', email: 'obs@pool.test', name: 'Pia Pool', passwordHash: 'unused' }).run();
	db.insert(table.userRole).values({ userId: 'obs-1', role: 'observer' }).run();
	db.insert(table.teamMember).values({ teamId: 'team-a', userId: 'obs-1' }).run();
	db.insert(table.gwEvent).values({ id: 'ev-1', sourceEventId: 'S-pool-1', role: 'observation', state: 'active', eventTime: new Date('2026-12-02T00:00:00Z') }).run();
	db.insert(table.candidate)
		.values({ id: 'cand-1', eventId: 'ev-1', name: 'AT-pool-a', raDeg: 150.2, decDeg: -30.1, discoveredAt: new Date('2026-12-02T03:00:00Z'), magnitude: 20.3, filter: 'r', teamId: 'team-a', reportedByUserId: 'obs-1' })
		.run();
	return { observer: loadSessionUser('obs-1')! };
}

const PHOTOMETRY = 'time,filter,mag,mag_err,limit\n# first night\n2026-12-02T03:04:05Z,r,20.1,0.05,\n2026-12-02T04:04:05Z,g,,,21.5\n';

beforeEach(() => {
	vi.mocked(parsePointingCsv).mockClear();
	vi.mocked(readPhotometryUpload).mockClear();
});
afterAll(async () => {
	useInlineWork(false);
	await stopWorkPool();
});

describe('pointing CSV uploads', () => {
	it('are read by one task on the work pool, never on the calling thread, with the same lines and messages', async () => {
		expect.hasAssertions();
		const before = workDone('readPointingCsv');
		const good = await parseObservationCsv(pointings(2_000));
		expect(good.errors).toEqual([]);
		expect(good.rows).toHaveLength(2_000);
		expect(good.lines.slice(0, 3)).toEqual([2, 3, 4]);
		expect(good.rows[1]).toEqual({ observedAt: '2026-12-02T01:00:04.000Z', raDeg: 150.1, decDeg: -30, filter: 'r', exposureS: 60, limitingMag: 20.5, seeingArcsec: 1.2, notes: 'tile 1, clear' });
		const bad = await parseObservationCsv(pointings(50, 31));
		expect(bad).toEqual({ rows: [], lines: [], errors: [{ line: 31, message: 'RA (deg, J2000) must be from 0 up to (not including) 360.' }] });
		expect(workDone('readPointingCsv') - before).toBe(2);
		expect(parsePointingCsv).not.toHaveBeenCalled();
	}, 60_000);

	it('would be seen on the calling thread: run inline, the reader is called here and the pool is not used', async () => {
		expect.hasAssertions();
		useInlineWork(true);
		try {
			const before = workDone('readPointingCsv');
			const out = await parseObservationCsv(pointings(10));
			expect(out.rows).toHaveLength(10);
			expect(parsePointingCsv).toHaveBeenCalledTimes(1);
			expect(workDone('readPointingCsv')).toBe(before);
		} finally {
			useInlineWork(false);
		}
	});
});

describe('photometry CSV uploads', () => {
	it('are read by one task on the work pool; the store checks and the storing follow on this thread', async () => {
		expect.hasAssertions();
		const { observer } = world();
		const before = workDone('readPhotometryUpload');
		const out = await addPhotometryCsv({ user: observer }, 'cand-1', PHOTOMETRY, NOW);
		expect(out.added).toBe(2);
		expect(db.select().from(table.candidatePhotometry).where(eq(table.candidatePhotometry.candidateId, 'cand-1')).all()).toHaveLength(2);
		// The same file again: refused by the check against the store, naming the lines the pool counted.
		const again = await addPhotometryCsv({ user: observer }, 'cand-1', PHOTOMETRY, NOW).catch((e) => e);
		expect(again).toBeInstanceOf(PhotometryRefused);
		expect((again as PhotometryRefused).details).toEqual([
			{ line: 3, message: 'a r measurement at 2026-12-02T03:04:05.000Z is already stored for this candidate' },
			{ line: 4, message: 'a g measurement at 2026-12-02T04:04:05.000Z is already stored for this candidate' }
		]);
		expect(workDone('readPhotometryUpload') - before).toBe(2);
		expect(readPhotometryUpload).not.toHaveBeenCalled();
	}, 60_000);

	it('would be seen on the calling thread: run inline, the reader is called here', async () => {
		expect.hasAssertions();
		const { observer } = world();
		useInlineWork(true);
		try {
			const before = workDone('readPhotometryUpload');
			expect((await addPhotometryCsv({ user: observer }, 'cand-1', PHOTOMETRY, NOW)).added).toBe(2);
			expect(readPhotometryUpload).toHaveBeenCalledTimes(1);
			expect(workDone('readPhotometryUpload')).toBe(before);
		} finally {
			useInlineWork(false);
		}
	});
});
