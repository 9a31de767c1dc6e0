/**
 * The event loop under heavy work, through the built app's real routes (`node server.js` on a
 * temporary seeded SQLite database, the live bench's world: demo collaboration, one event with a
 * ranked map, API tokens). A probe sends a tiny request (`GET /api/v1/me`, one token lookup) every
 * PROBE_EVERY_MS and times each answer:
 *  - idle, for IDLE_MS (the reference, same run);
 *  - while a flat nside-1024 map (~100 MB, tests/bench/sky/make_bench_maps.py) is fetched from a
 *    local host and analysed: `POST /api/v1/notices` with an update notice naming its URL, until
 *    the answer;
 *  - for RANKING_MS after it, while the new map's targets are ranked (galaxies of the demo
 *    catalogue, fields of every wide telescope) in the background;
 *  - while the network plan is computed: `GET /events/{id}/plan/{telescope}?format=json`, 3 times.
 * Reported per phase: median and worst probe latency (strainlineMs = worst, referenceMs = the idle
 * worst), the job's duration and the load average. Bounded: the app is built when older than the
 * sources; a watchdog ends everything after 170 s.
 */
import { execFileSync, spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { createReadStream, existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, statSync } from 'node:fs';
import http from 'node:http';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { median, type BenchResult } from './run.ts';
import { prepareAppWorld } from './live/app-world.ts';
import { freePort } from './live/protocol.ts';
import { appProcessEnv } from '../../src/lib/server/platform/app-process.ts';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));
const PYTHON = '/usr/bin/python3';
const PROBE_EVERY_MS = 20;
const IDLE_MS = 3000;
const RANKING_MS = 8000;
const PLANS = 3;
const WATCHDOG_MS = 170_000;
const SOURCE_ID = 'SX30099060';

function newestSourceMs(): number {
	let newest = 0;
	const walk = (dir: string) => {
		for (const e of readdirSync(dir, { withFileTypes: true })) {
			const p = join(dir, e.name);
			if (e.isDirectory()) walk(p);
			else if (!/\.(spec|test)\.ts$/.test(e.name)) newest = Math.max(newest, statSync(p).mtimeMs);
		}
	};
	walk(join(ROOT, 'src'));
	for (const f of ['server.js', 'svelte.config.js', 'vite.config.ts']) newest = Math.max(newest, statSync(join(ROOT, f)).mtimeMs);
	return newest;
}

/** Build the app when build/ is older than the sources (also used by uploads.bench.ts). */
export function ensureBuilt(): void {
	const worker = join(ROOT, 'build/work-worker.js');
	if (existsSync(worker) && statSync(worker).mtimeMs > newestSourceMs()) return;
	process.stderr.write('bench: building the app (vite build)…\n');
	const r = spawnSync('npx', ['vite', 'build', '--logLevel', 'warn'], { cwd: ROOT, stdio: ['ignore', 'inherit', 'inherit'], timeout: 300_000 });
	if (r.status !== 0) throw new Error('vite build failed');
}

export function waitForLine(child: ChildProcess, text: string, ms: number): Promise<void> {
	return new Promise((resolve, reject) => {
		const timer = setTimeout(() => reject(new Error(`app not ready after ${ms} ms`)), ms);
		let buffer = '';
		child.stdout!.on('data', (chunk: Buffer) => {
			buffer += chunk.toString();
			if (buffer.includes(text)) {
				clearTimeout(timer);
				resolve();
			}
		});
		child.once('exit', (code) => reject(new Error(`app exited with ${code}`)));
	});
}

/** Probe latencies (ms) while `job` runs (or for `forMs` when there is no job), and the job's duration. */
async function probe(origin: string, token: string, job: (() => Promise<unknown>) | null, forMs = 0): Promise<{ latencies: number[]; jobMs: number }> {
	const latencies: number[] = [];
	let done = false;
	const t0 = performance.now();
	const running = (job ? job() : new Promise((r) => setTimeout(r, forMs))).finally(() => (done = true));
	while (!done) {
		const started = performance.now();
		const res = await fetch(`${origin}/api/v1/me`, { headers: { authorization: `Bearer ${token}` } });
		await res.text();
		if (res.status !== 200) throw new Error(`probe answered ${res.status}`);
		latencies.push(performance.now() - started);
		await new Promise((r) => setTimeout(r, PROBE_EVERY_MS));
	}
	await running;
	return { latencies, jobMs: performance.now() - t0 };
}

export async function run(): Promise<BenchResult[]> {
	ensureBuilt();
	const dir = mkdtempSync(join(tmpdir(), 'strainline-event-loop-bench-'));
	const children: ChildProcess[] = [];
	const servers: http.Server[] = [];
	const watchdog = setTimeout(() => {
		process.stderr.write('event-loop bench: watchdog, stopping\n');
		for (const c of children) c.kill('SIGKILL');
		for (const s of servers) s.close();
	}, WATCHDOG_MS);
	try {
		execFileSync(PYTHON, [join(ROOT, 'tests/bench/sky/make_bench_maps.py'), dir], { stdio: ['ignore', 'ignore', 'inherit'] });
		const mapFile = join(dir, 'flat.fits');
		const mapBytes = statSync(mapFile).size;
		const dbFile = join(dir, 'app.sqlite');
		const storageDir = join(dir, 'storage');
		const world = await prepareAppWorld(ROOT, dbFile, storageDir);

		// The map's host: SKYMAP_HOSTS allows 127.0.0.1 by default.
		const mapHost = http.createServer((_req, res) => {
			res.writeHead(200, { 'content-type': 'application/fits', 'content-length': String(mapBytes) });
			createReadStream(mapFile).pipe(res);
		});
		servers.push(mapHost);
		const mapPort = await freePort();
		await new Promise<void>((r) => mapHost.listen(mapPort, '127.0.0.1', r));

		const port = await freePort();
		const origin = `http://127.0.0.1:${port}`;
		const app = spawn(process.execPath, ['server.js'], {
			cwd: ROOT,
			stdio: ['ignore', 'pipe', 'inherit'],
			env: {
				...appProcessEnv(),
				PORT: String(port),
				HOST: '127.0.0.1',
				ORIGIN: origin,
				DATABASE_URL: dbFile,
				STORAGE_DIR: storageDir,
				VTP_BROKER: '',
				VTP_ARCHIVE_URL: '',
				FAKE_SMTP_PORT: '0',
				SMTP_URL: '',
				SKYMAP_MAX_MB: '160',
				SKYMAP_MAX_INFLATED_MB: '512'
			}
		});
		children.push(app);
		await waitForLine(app, 'Strainline listening on', 60_000);
		const token = world.claimerTokens[1]; // the coordinator: may submit notices and see plans
		// Warm: the first request loads the route modules.
		await probe(origin, token, null, 500);

		const results: BenchResult[] = [];
		const load = () => loadavg()[0].toFixed(1);
		const idle = await probe(origin, token, null, IDLE_MS);
		const idleWorst = Math.max(...idle.latencies);
		const row = (name: string, p: { latencies: number[]; jobMs: number }, note: string, loadNow: string): BenchResult => ({
			suite: 'event-loop',
			name,
			strainlineMs: Math.max(...p.latencies),
			referenceMs: idleWorst,
			reference: `worst probe idle (median ${median(idle.latencies).toFixed(1)} ms)`,
			note: `probe median ${median(p.latencies).toFixed(1)} ms, ${p.latencies.length} probes; ${note}; load ${loadNow}`
		});
		results.push({
			suite: 'event-loop',
			name: 'idle: worst probe',
			strainlineMs: idleWorst,
			note: `median ${median(idle.latencies).toFixed(1)} ms, ${idle.latencies.length} probes; load ${load()}`
		});

		const xml = readFileSync(join(ROOT, 'tests/fixtures/notices/bns-update.xml'), 'utf8')
			.replaceAll('SX30041207', SOURCE_ID)
			.replace(/http:\/\/127\.0\.0\.1:8098\/skymaps\/[^"]+/, `http://127.0.0.1:${mapPort}/flat.fits`)
			.replace(/<ISOTime>\s*[^<]+\s*<\/ISOTime>/, `<ISOTime>${new Date(Date.now() - 3600_000).toISOString()}</ISOTime>`);
		let analysedNote = '';
		const analysis = await probe(origin, token, async () => {
			const res = await fetch(`${origin}/api/v1/notices`, { method: 'POST', headers: { authorization: `Bearer ${token}`, 'content-type': 'application/xml' }, body: xml });
			const body = (await res.json()) as { outcome?: string; skymapError?: string };
			if (res.status >= 300 || body.skymapError) throw new Error(`notice answered ${res.status}: ${JSON.stringify(body)}`);
			analysedNote = `notice ${body.outcome}`;
		});
		results.push(row(`fetch + analyse flat nside-1024 map (${(mapBytes / 1e6).toFixed(0)} MB)`, analysis, `job ${analysis.jobMs.toFixed(0)} ms, ${analysedNote}`, load()));
		const ranking = await probe(origin, token, null, RANKING_MS);
		results.push(row(`next ${RANKING_MS / 1000} s: ranking of the new map`, ranking, 'galaxies + fields of every wide telescope', load()));

		const telescope = world.telescopes[0].id;
		const plans = await probe(origin, token, async () => {
			for (let k = 0; k < PLANS; k++) {
				const res = await fetch(`${origin}/events/${world.eventId}/plan/${telescope}?format=json`, { headers: { authorization: `Bearer ${token}` } });
				await res.text();
				if (res.status !== 200) throw new Error(`plan answered ${res.status}`);
			}
		});
		results.push(row(`network plan × ${PLANS}`, plans, `job ${(plans.jobMs / PLANS).toFixed(0)} ms per plan`, load()));
		app.kill('SIGTERM');
		return results;
	} finally {
		clearTimeout(watchdog);
		for (const c of children) if (c.exitCode === null) c.kill('SIGKILL');
		for (const s of servers) s.close();
		rmSync(dir, { recursive: true, force: true });
	}
}
