/**
 * Event coverage after large pointing uploads (`npm run bench -- uploads-coverage`), on a SQLite
 * file in a temporary directory, through the calls the event page makes (`eventCoverage`, on the
 * work pool, the map read with `loadSkyMap`):
 *
 *  - 9,000 pointings (1° fields on a grid over the probable region of tests/fixtures/sky/
 *    flat_ring_map.fits), stored with `reportMany`, then the first page load: the union computed
 *    from nothing;
 *  - then 1 more pointing, and then 9,000 more (a second pass, half a field further east, later):
 *    the page load after each extends the kept union by the new pointings only. Reference in the
 *    same run: the same page load with the kept union dropped (`clearCoverageCache`), i.e. the
 *    full computation over every pointing, as every page load after a new pointing did before.
 *
 * Beside each figure: the longest the event loop was held during the call (a 5 ms timer's worst
 * lateness) and the load average (the machine is shared; compare figures within a run).
 */
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { connect, useDatabase, db } from '../../src/lib/server/platform/db/index.ts';
import * as table from '../../src/lib/server/platform/db/schema.ts';
import { saveFile, useStorageRoot } from '../../src/lib/server/platform/storage.ts';
import { loadSessionUser } from '../../src/lib/server/people/auth.ts';
import { stopWorkPool } from '../../src/lib/server/platform/work-pool.ts';
import { parseObservationCsv, reportMany } from '../../src/lib/server/coordination/observations.ts';
import { clearCoverageCache, eventCoverage, type EventCoverage } from '../../src/lib/server/coordination/event-coverage.ts';
import type { BenchResult } from './run.ts';

const ROWS = 9_000;
const MERGER = new Date('2026-12-02T00:00:00Z');
const NOW = new Date('2026-12-03T12:00:00Z');
const MAP = new URL('../fixtures/sky/flat_ring_map.fits', import.meta.url);

const load = () => loadavg()[0].toFixed(2);

/** `rows` pointings from `startMs`, 4 s apart, on a 0.8° × 0.4° grid round (150 + raShift, −30). */
function pointingsCsv(rows: number, startMs: number, raShift: number): string {
	const lines = ['observed_at,ra_deg,dec_deg,filter,exposure_s,limiting_mag'];
	for (let i = 0; i < rows; i++) {
		const at = new Date(startMs + i * 4_000).toISOString();
		lines.push(`${at},${(150 + raShift + ((i % 90) - 45) * 0.8).toFixed(4)},${(-30 + (Math.floor(i / 90) - 50) * 0.4).toFixed(4)},r,60,20.5`);
	}
	return lines.join('\n') + '\n';
}

function setUp(): void {
	db.insert(table.team).values({ id: 'team-a', name: 'Bench Ridge', region: 'Bench' }).run();
	db.insert(table.telescope)
		.values({ id: 'tel-a', teamId: 'team-a', name: 'Bench Scope', siteName: 'Bench site', latitudeDeg: -30, longitudeDeg: -70, elevationM: 2000, apertureM: 1, fovShape: 'rectangle', fovWidthDeg: 1, fovHeightDeg: 1, filters: ['g', 'r'], limitingMag: 21, limitingMagExposureS: 60 })
		.run();
	db.insert(table.user).values({ id: 'bench-obs', email: 'obs@bench.test', name: 'Bea Bench', passwordHash: 'unused' }).run();
	db.insert(table.userRole).values({ userId: 'bench-obs', role: 'observer' }).run();
	db.insert(table.teamMember).values({ teamId: 'team-a', userId: 'bench-obs' }).run();
	db.insert(table.gwEvent).values({ id: 'ev-1', sourceEventId: 'S-bench-cover', role: 'observation', state: 'active', eventTime: MERGER }).run();
	db.insert(table.notice).values({ id: 'n-1', eventId: 'ev-1', ivorn: 'ivo://bench/cover#1', kind: 'initial', role: 'observation', authoredAt: MERGER, citations: [], parsed: {} }).run();
	const file = saveFile('skymaps', 'flat.fits', new Uint8Array(readFileSync(MAP)));
	db.insert(table.skymap).values({ id: 'map-1', eventId: 'ev-1', noticeId: 'n-1', filePath: file.path }).run();
	db.update(table.gwEvent).set({ latestSkymapId: 'map-1' }).run();
}

async function upload(text: string): Promise<void> {
	const parsed = await parseObservationCsv(text);
	if (parsed.errors.length) throw new Error(`bench CSV refused: ${JSON.stringify(parsed.errors.slice(0, 2))}`);
	const user = loadSessionUser('bench-obs')!;
	await reportMany({ user }, parsed.rows.map((r) => ({ ...r, eventId: 'ev-1', telescopeId: 'tel-a' })), 'csv', { lines: parsed.lines, now: NOW });
}

/** One page load's coverage: wall time, and the event loop's worst lateness meanwhile. */
async function timed(): Promise<{ ms: number; heldMs: number; c: EventCoverage }> {
	let worst = 0;
	let last = performance.now();
	const probe = setInterval(() => {
		const now = performance.now();
		worst = Math.max(worst, now - last - 5);
		last = now;
	}, 5);
	const t = performance.now();
	const c = (await eventCoverage('ev-1'))!;
	const ms = performance.now() - t;
	clearInterval(probe);
	worst = Math.max(worst, performance.now() - last - 5);
	return { ms, heldMs: worst, c };
}

export async function run(): Promise<BenchResult[]> {
	const dir = mkdtempSync(join(tmpdir(), 'strainline-coverage-bench-'));
	const results: BenchResult[] = [];
	try {
		useDatabase(connect(join(dir, 'bench.sqlite')));
		useStorageRoot(join(dir, 'files'));
		setUp();
		const t1 = MERGER.getTime() + 3_600_000;
		await upload(pointingsCsv(ROWS, t1, 0));
		const first = await timed();
		if (first.c.update !== 'recomputed' || first.c.observations !== ROWS) throw new Error('bench: first coverage not computed afresh');
		results.push({
			suite: 'uploads',
			name: `event coverage, ${ROWS} pointings, first page load (computed afresh, map read on the pool)`,
			strainlineMs: first.ms,
			note: `event loop held ≤ ${first.heldMs.toFixed(0)} ms; union ${first.c.union.toFixed(4)} ± ${first.c.errorBound.toExponential(1)}; load ${load()}`
		});

		const steps: [string, () => Promise<void>][] = [
			['+1 pointing', () => upload(pointingsCsv(1, t1 + ROWS * 4_000, 0.2))],
			[`+${ROWS} pointings (second pass)`, () => upload(pointingsCsv(ROWS, t1 + (ROWS + 1) * 4_000, 0.4))]
		];
		for (const [label, add] of steps) {
			await add();
			const inc = await timed();
			if (inc.c.update !== 'extended') throw new Error(`bench: ${label} was not an extension (${inc.c.update})`);
			const loadInc = load();
			clearCoverageCache();
			const full = await timed();
			if (full.c.update !== 'recomputed' || full.c.observations !== inc.c.observations) throw new Error('bench: reference not a full computation');
			const diff = Math.abs(inc.c.union - full.c.union);
			if (diff > inc.c.errorBound + full.c.errorBound) throw new Error(`bench: extended union off by ${diff}`);
			results.push({
				suite: 'uploads',
				name: `event coverage after ${label} (${inc.c.observations} in all): page load extending the kept union`,
				strainlineMs: inc.ms,
				referenceMs: full.ms,
				reference: `full recompute over all ${full.c.observations} (cache dropped, map re-read), event loop held ≤ ${full.heldMs.toFixed(0)} ms, load ${load()}`,
				note: `event loop held ≤ ${inc.heldMs.toFixed(0)} ms; |extended − full| ${diff.toExponential(1)}, bounds ${inc.c.errorBound.toExponential(1)} / ${full.c.errorBound.toExponential(1)}; load ${loadInc}`
			});
		}
	} finally {
		await stopWorkPool();
		useStorageRoot(null);
		db.$client.close();
		rmSync(dir, { recursive: true, force: true });
	}
	return results;
}
