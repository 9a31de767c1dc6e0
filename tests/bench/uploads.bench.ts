/**
 * Large uploads (`npm run bench -- uploads`), on a SQLite file in a temporary directory (WAL, as the
 * app runs it), through the same domain calls the routes make:
 *
 *  1. A 9,000-row pointing CSV (just under 1 MB) parsed on the work pool and stored (`parseObservationCsv` +
 *     `reportMany`), median of 3 runs. Reference: the same text parsed by Python's csv module
 *     (Debian's /usr/bin/python3, timed inside Python, so no start-up is counted): what reading the
 *     rows alone costs. Also, once, the same rows reported one by one (`report` per row: a
 *     transaction, an event-log row and a broadcast each), which is how uploads were stored before.
 *  2. A 10^6-row synthetic catalogue (72 MB) uploaded to the BUILT app (`node server.js` on a
 *     temporary database with the demo world, tests/bench/live/app-world.ts) through its real
 *     route, `POST /catalogs/upload` (streamed body, the coordinator's API token), and the latency
 *     of a signed-in page, `GET /catalogs` (the catalogue list, server-rendered), while it runs,
 *     against the same page idle in the same run. A child process requests the page every 50 ms,
 *     so its clock is not held up by this process. The app's peak memory is its VmHWM
 *     (/proc/PID/status), read before and after the import.
 *
 * `UPLOADS_BENCH_PART=catalogue` runs part 2 alone.
 *
 * Every figure is printed with the load average (the machine is shared; compare figures within a run).
 */
import { createReadStream, createWriteStream, mkdtempSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { Readable } from 'node:stream';
import { fileURLToPath } from 'node:url';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { connect, useDatabase, db } from '../../src/lib/server/platform/db/index.ts';
import * as table from '../../src/lib/server/platform/db/schema.ts';
import { loadSessionUser } from '../../src/lib/server/people/auth.ts';
import { parseObservationCsv, report, reportMany } from '../../src/lib/server/coordination/observations.ts';
import { SYSTEM } from '../../src/lib/server/platform/realtime.ts';
import { stopWorkPool } from '../../src/lib/server/platform/work-pool.ts';
import { generateSyntheticCatalog, syntheticCatalogCsv } from '../../seeds/synthetic-catalog.ts';
import { median, type BenchResult } from './run.ts';
import { ensureBuilt, waitForLine } from './event-loop.bench.ts';
import { prepareAppWorld } from './live/app-world.ts';
import { freePort } from './live/protocol.ts';
import { stop } from './live.bench.ts';
import { appProcessEnv } from '../../src/lib/server/platform/app-process.ts';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));

const ROWS = 9_000;
const CATALOG_ROWS = 1_000_000;
const MERGER = new Date('2026-12-02T00:00:00Z');
const NOW = new Date('2026-12-02T12:00:00Z');

const load = () => loadavg()[0].toFixed(2);

function pointingsCsv(): string {
	const lines = ['observed_at,ra_deg,dec_deg,filter,exposure_s,limiting_mag,seeing_arcsec,notes'];
	for (let i = 0; i < ROWS; i++) {
		const at = new Date(MERGER.getTime() + 3_600_000 + i * 4_000).toISOString();
		lines.push(`${at},${(150 + ((i % 90) - 45) * 0.8).toFixed(4)},${(-30 + (Math.floor(i / 90) - 50) * 0.4).toFixed(4)},${i % 3 ? 'r' : 'g'},60,20.5,1.2,"grid tile ${i}, first pass, clear and steady"`);
	}
	return lines.join('\n') + '\n';
}

function setUp(): { userId: string } {
	db.insert(table.team).values({ id: 'team-a', name: 'Bench Ridge', region: 'Bench' }).run();
	db.insert(table.telescope)
		.values({ id: 'tel-a', teamId: 'team-a', name: 'Bench Scope', siteName: 'Bench site', latitudeDeg: -30, longitudeDeg: -70, elevationM: 2000, apertureM: 1, fovShape: 'rectangle', fovWidthDeg: 1, fovHeightDeg: 1, filters: ['g', 'r'], limitingMag: 21, limitingMagExposureS: 60 })
		.run();
	db.insert(table.user).values({ id: 'bench-obs', email: 'obs@bench.test', name: 'Bea Bench', passwordHash: 'unused' }).run();
	db.insert(table.userRole).values({ userId: 'bench-obs', role: 'observer' }).run();
	db.insert(table.teamMember).values({ teamId: 'team-a', userId: 'bench-obs' }).run();
	return { userId: 'bench-obs' };
}

function newEvent(k: number): string {
	const id = `bench-ev-${k}`;
	db.insert(table.gwEvent).values({ id, sourceEventId: `S-bench-${k}`, role: 'observation', state: 'active', eventTime: MERGER }).run();
	return id;
}

function cpuMs(since: NodeJS.CpuUsage): number {
	const u = process.cpuUsage(since);
	return (u.user + u.system) / 1000;
}

/** Python's csv module reading the same file: median of 3, timed inside Python. */
function pythonCsvMs(path: string): number | undefined {
	const script = `
import csv, time, statistics, sys
ts = []
for _ in range(3):
    t = time.perf_counter()
    with open(sys.argv[1], newline='', encoding='utf-8') as f:
        rows = list(csv.reader(f))
    ts.append((time.perf_counter() - t) * 1000)
assert len(rows) == ${ROWS + 1}
print(statistics.median(ts))
`;
	const r = spawnSync('/usr/bin/python3', ['-c', script, path], { encoding: 'utf8' });
	return r.status === 0 ? Number(r.stdout.trim()) : undefined;
}

/** A child process that GETs `url` every 50 ms for `ms` (or until told to stop) and prints the latencies. */
function pageClient(url: string, headers: Record<string, string>, ms: number): { done: Promise<number[]>; stop: () => void } {
	const code = `
const url = process.argv[1], headers = JSON.parse(process.argv[2]), until = Date.now() + Number(process.argv[3]);
const out = []; let stop = false;
process.on('message', () => { stop = true; });
(async () => {
  while (!stop && Date.now() < until && out.length < 2000) {
    const t = performance.now();
    const r = await fetch(url, { headers, redirect: 'manual' });
    await r.text();
    if (r.status !== 200) { console.error('page answered ' + r.status); process.exit(1); }
    out.push(performance.now() - t);
    await new Promise((s) => setTimeout(s, 50));
  }
  process.send(out, () => process.exit(0));
})();
`;
	const child = spawn(process.execPath, ['-e', code, url, JSON.stringify(headers), String(ms)], { stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
	const done = new Promise<number[]>((resolve, reject) => {
		child.once('message', (m) => resolve(m as number[]));
		child.once('error', reject);
	});
	return { done, stop: () => child.connected && child.send('stop') };
}

function percentile(values: number[], p: number): number {
	const s = [...values].sort((a, b) => a - b);
	return s[Math.min(s.length - 1, Math.floor(p * s.length))];
}

export async function run(): Promise<BenchResult[]> {
	const dir = mkdtempSync(join(tmpdir(), 'strainline-uploads-bench-'));
	const results: BenchResult[] = [];
	try {
		if (process.env.UPLOADS_BENCH_PART === 'catalogue') return await catalogueDuringPages(dir);
		useDatabase(connect(join(dir, 'bench.sqlite')));
		const { userId } = setUp();
		const user = loadSessionUser(userId)!;
		const text = pointingsCsv();
		const csvPath = join(dir, 'pointings.csv');
		writeFileSync(csvPath, text);

		// 1. Pointings.
		const wall: number[] = [];
		const cpu: number[] = [];
		const parseOnly: number[] = [];
		for (let k = 0; k < 3; k++) {
			const eventId = newEvent(k);
			let t = performance.now();
			await parseObservationCsv(text);
			parseOnly.push(performance.now() - t);
			const c = process.cpuUsage();
			t = performance.now();
			const parsed = await parseObservationCsv(text);
			if (parsed.errors.length) throw new Error(`bench CSV refused: ${JSON.stringify(parsed.errors.slice(0, 2))}`);
			const out = await reportMany({ user }, parsed.rows.map((r) => ({ ...r, eventId, telescopeId: 'tel-a' })), 'csv', { lines: parsed.lines, now: NOW });
			if (out.results.length !== ROWS) throw new Error('bench upload not stored');
			wall.push(performance.now() - t);
			cpu.push(cpuMs(c));
		}
		const pyMs = pythonCsvMs(csvPath);
		results.push({
			suite: 'uploads',
			name: `pointing CSV ${ROWS} rows (${(text.length / 1e6).toFixed(2)} MB): parse + store`,
			strainlineMs: median(wall),
			referenceMs: pyMs,
			reference: 'Python csv.reader, parse only (/usr/bin/python3)',
			note: `CPU ${median(cpu).toFixed(0)} ms; parse alone ${median(parseOnly).toFixed(0)} ms; load ${load()}`
		});

		const eventId = newEvent(99);
		const parsed = await parseObservationCsv(text);
		if (parsed.errors.length) throw new Error('bench CSV refused');
		const c = process.cpuUsage();
		const t = performance.now();
		for (const r of parsed.rows) report({ user }, { ...r, eventId, telescopeId: 'tel-a' }, 'csv', NOW);
		results.push({
			suite: 'uploads',
			name: `pointing CSV ${ROWS} rows stored one row at a time (before)`,
			strainlineMs: performance.now() - t,
			note: `one run; CPU ${cpuMs(c).toFixed(0)} ms; ${ROWS} transactions, log rows and broadcasts; load ${load()}`
		});

		db.$client.close();
		await stopWorkPool();
		results.push(...(await catalogueDuringPages(dir)));
	} finally {
		rmSync(dir, { recursive: true, force: true });
	}
	return results;
}

/** VmHWM (peak resident memory) and VmRSS of a process, MB. */
function memoryOf(pid: number): { peakMb: number; rssMb: number } {
	const status = readFileSync(`/proc/${pid}/status`, 'utf8');
	const kb = (key: string) => Number(new RegExp(`${key}:\\s+(\\d+)`).exec(status)?.[1] ?? NaN);
	return { peakMb: kb('VmHWM') / 1024, rssMb: kb('VmRSS') / 1024 };
}

/** Part 2: the 10^6-row catalogue through the built app's upload route, and a signed-in page meanwhile. */
async function catalogueDuringPages(dir: string): Promise<BenchResult[]> {
	ensureBuilt();
	const results: BenchResult[] = [];
	const dbFile = join(dir, 'app.sqlite');
	const storageDir = join(dir, 'storage');
	const world = await prepareAppWorld(ROOT, dbFile, storageDir);
	db.$client.close();
	const csvFile = join(dir, 'catalogue.csv');
	const options = { rows: CATALOG_ROWS, maxDistanceMpc: 400, seed: 11 };
	const cat = generateSyntheticCatalog(options);
	const out = createWriteStream(csvFile);
	for (const piece of syntheticCatalogCsv(cat, options, 5000)) if (!out.write(piece)) await new Promise<void>((r) => out.once('drain', () => r()));
	await new Promise<void>((r) => out.end(r));
	const csvBytes = statSync(csvFile).size;

	const port = await freePort();
	const origin = `http://127.0.0.1:${port}`;
	let app: ChildProcess | null = null;
	try {
		// UPLOADS_BENCH_NODE_ARGS: extra node flags for the app, e.g. "--cpu-prof --cpu-prof-dir=/tmp/prof".
		const nodeArgs = (process.env.UPLOADS_BENCH_NODE_ARGS ?? '').split(' ').filter(Boolean);
		app = spawn(process.execPath, [...nodeArgs, 'server.js'], {
			cwd: ROOT,
			stdio: ['ignore', 'pipe', 'inherit'],
			env: { ...appProcessEnv(), PORT: String(port), HOST: '127.0.0.1', ORIGIN: origin, DATABASE_URL: dbFile, STORAGE_DIR: storageDir, VTP_BROKER: '', VTP_ARCHIVE_URL: '', FAKE_SMTP_PORT: '0', SMTP_URL: '' }
		});
		await waitForLine(app, 'Strainline listening on', 60_000);
		const headers = { authorization: `Bearer ${world.claimerTokens[1]}` }; // the coordinator: may import catalogues
		const page = `${origin}/catalogs`;
		await pageClient(page, headers, 1500).done; // warm: the first requests load the route modules
		const idleLoad = load();
		const idle = await pageClient(page, headers, 5000).done;
		const before = memoryOf(app.pid!);

		const client = pageClient(page, headers, 600_000);
		const t = performance.now();
		const res = await fetch(`${origin}/catalogs/upload?name=${encodeURIComponent('bench 1e6')}&synthetic=1`, {
			method: 'POST',
			headers: { ...headers, 'content-type': 'text/csv' },
			body: Readable.toWeb(createReadStream(csvFile, { highWaterMark: 64 * 1024 })) as ReadableStream<Uint8Array>,
			duplex: 'half'
		} as RequestInit);
		const body = (await res.json()) as { state?: string; rowCount?: number; error?: string };
		const importMs = performance.now() - t;
		client.stop();
		const during = await client.done;
		const after = memoryOf(app.pid!);
		if (res.status !== 201 || body.rowCount !== CATALOG_ROWS) throw new Error(`bench import answered ${res.status}: ${JSON.stringify(body).slice(0, 300)}`);
		results.push({
			suite: 'uploads',
			name: `catalogue import ${CATALOG_ROWS} rows (${(csvBytes / 1e6).toFixed(0)} MB), built app, POST /catalogs/upload`,
			strainlineMs: importMs,
			note: `one run; app peak RSS ${after.peakMb.toFixed(0)} MB (before the import: RSS ${before.rssMb.toFixed(0)} MB, peak ${before.peakMb.toFixed(0)} MB); load ${load()}`
		});
		results.push({
			suite: 'uploads',
			name: `signed-in page GET /catalogs during the import (median; p95 ${percentile(during, 0.95).toFixed(1)} ms, max ${Math.max(...during).toFixed(0)} ms, n=${during.length})`,
			strainlineMs: median(during),
			referenceMs: median(idle),
			reference: `the same page idle (p95 ${percentile(idle, 0.95).toFixed(1)} ms, max ${Math.max(...idle).toFixed(0)} ms, n=${idle.length}, load ${idleLoad})`,
			note: `during/idle median ${(median(during) / median(idle)).toFixed(2)}×; load ${load()}`
		});
		await stop(app, 10_000); // a clean exit, so that a --cpu-prof profile is written
	} finally {
		if (app && app.exitCode === null) app.kill('SIGKILL');
	}
	return results;
}
