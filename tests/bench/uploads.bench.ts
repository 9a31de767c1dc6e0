/**
 * Large uploads (`npm run bench -- uploads`), on a SQLite file in a temporary directory (WAL, as the
 * app runs it), through the same domain calls the routes make:
 *
 *  1. A 9,000-row pointing CSV (just under 1 MB) parsed and stored (`parseObservationCsv` +
 *     `reportMany`), median of 3 runs. Reference: the same text parsed by Python's csv module
 *     (Debian's /usr/bin/python3, timed inside Python, so no start-up is counted): what reading the
 *     rows alone costs. Also, once, the same rows reported one by one (`report` per row: a
 *     transaction, an event-log row and a broadcast each), which is how uploads were stored before.
 *  2. A 10^6-row synthetic catalogue imported (`importCatalog`, streamed in 1 MB chunks), and the
 *     latency of a small signed-in page while it runs against the same page when idle. The page is
 *     an HTTP server in this process doing what a signed-in page load does on the server (session
 *     cookie validated against the database, one list query, JSON out); a child process requests
 *     it every 50 ms, so its clock is not held up by this process's event loop.
 *
 * Every figure is printed with the load average (the machine is shared; compare figures within a run).
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { spawn, spawnSync } from 'node:child_process';
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { connect, useDatabase, db } from '../../src/lib/server/platform/db/index.ts';
import * as table from '../../src/lib/server/platform/db/schema.ts';
import { createSession, generateSessionToken, loadSessionUser, validateSessionToken } from '../../src/lib/server/people/auth.ts';
import { parseObservationCsv, report, reportMany } from '../../src/lib/server/coordination/observations.ts';
import { importCatalog, listCatalogs } from '../../src/lib/server/targeting/catalogs.ts';
import { SYSTEM } from '../../src/lib/server/platform/realtime.ts';
import { generateSyntheticCatalog, syntheticCatalogCsv } from '../../seeds/synthetic-catalog.ts';
import { median, type BenchResult } from './run.ts';

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
function pageClient(url: string, cookie: string, ms: number): { done: Promise<number[]>; stop: () => void } {
	const code = `
const url = process.argv[1], cookie = process.argv[2], until = Date.now() + Number(process.argv[3]);
const out = []; let stop = false;
process.on('message', () => { stop = true; });
(async () => {
  while (!stop && Date.now() < until && out.length < 2000) {
    const t = performance.now();
    const r = await fetch(url, { headers: { cookie } });
    await r.text();
    out.push(performance.now() - t);
    await new Promise((s) => setTimeout(s, 50));
  }
  process.send(out, () => process.exit(0));
})();
`;
	const child = spawn(process.execPath, ['-e', code, url, cookie, String(ms)], { stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
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
			parseObservationCsv(text);
			parseOnly.push(performance.now() - t);
			const c = process.cpuUsage();
			t = performance.now();
			const parsed = parseObservationCsv(text);
			if (parsed.errors.length) throw new Error(`bench CSV refused: ${JSON.stringify(parsed.errors.slice(0, 2))}`);
			const out = reportMany({ user }, parsed.rows.map((r) => ({ ...r, eventId, telescopeId: 'tel-a' })), 'csv', { lines: parsed.lines, now: NOW });
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
		const parsed = parseObservationCsv(text);
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

		// 2. A catalogue of 10^6 rows, and a page while it is imported.
		const token = generateSessionToken();
		createSession(token, userId);
		const server = http.createServer((req, res) => {
			const cookie = /session=([^;]+)/.exec(req.headers.cookie ?? '')?.[1] ?? '';
			const { user: who } = validateSessionToken(cookie);
			if (!who) {
				res.writeHead(401).end();
				return;
			}
			const body = JSON.stringify({ user: who.name, catalogs: listCatalogs().map((cat) => ({ id: cat.id, name: cat.name, state: cat.state, rows: cat.rowCount })) });
			res.writeHead(200, { 'content-type': 'application/json' }).end(body);
		});
		await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
		const url = `http://127.0.0.1:${(server.address() as AddressInfo).port}/`;
		try {
			const idleLoad = load();
			const idle = await pageClient(url, `session=${token}`, 4000).done;

			const options = { rows: CATALOG_ROWS, maxDistanceMpc: 400, seed: 11 };
			const cat = generateSyntheticCatalog(options);
			async function* chunks(): AsyncGenerator<string> {
				let buffer = '';
				for (const piece of syntheticCatalogCsv(cat, options, 5000)) {
					buffer += piece;
					if (buffer.length >= 1 << 20) {
						yield buffer;
						buffer = '';
					}
				}
				if (buffer) yield buffer;
			}
			let peakRssMb = 0;
			const sampler = setInterval(() => (peakRssMb = Math.max(peakRssMb, process.memoryUsage().rss / 1e6)), 100);
			const client = pageClient(url, `session=${token}`, 600_000);
			const c2 = process.cpuUsage();
			const t2 = performance.now();
			const out = await importCatalog(SYSTEM, { name: 'bench 1e6', synthetic: true, maxBytes: 500 * 1024 * 1024 }, chunks(), { progressEveryMs: null });
			const importMs = performance.now() - t2;
			const importCpu = cpuMs(c2);
			client.stop();
			const during = await client.done;
			clearInterval(sampler);
			if (out.state !== 'ready' || out.rowCount !== CATALOG_ROWS) throw new Error(`bench import failed: ${out.error}`);
			results.push({
				suite: 'uploads',
				name: `catalogue import ${CATALOG_ROWS} rows (${(out.report.bytes / 1e6).toFixed(0)} MB)`,
				strainlineMs: importMs,
				note: `one run; CPU ${importCpu.toFixed(0)} ms; peak RSS ${peakRssMb.toFixed(0)} MB; load ${load()}`
			});
			results.push({
				suite: 'uploads',
				name: `signed-in page during the import (median; p95 ${percentile(during, 0.95).toFixed(1)} ms, max ${Math.max(...during).toFixed(0)} ms, n=${during.length})`,
				strainlineMs: median(during),
				referenceMs: median(idle),
				reference: `the same page idle (p95 ${percentile(idle, 0.95).toFixed(1)} ms, n=${idle.length}, load ${idleLoad})`,
				note: `during/idle median ${(median(during) / median(idle)).toFixed(2)}×; load ${load()}`
			});
		} finally {
			server.close();
		}
	} finally {
		db.$client.close();
		rmSync(dir, { recursive: true, force: true });
	}
	return results;
}
