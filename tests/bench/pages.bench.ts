/**
 * Pages under a crowd: the built app (`node server.js`, the production entry) on a temporary
 * SQLite file holding the demo collaboration, one ranked event (the live benchmark's world,
 * `live/app-world.ts`) and 18,000 pointings on that event (`pages/crowd.ts`). Six demo people
 * are signed in (a session each, made by the auth module as the sign-in form would).
 *
 * Phases, one after another in the same run:
 *  1. cold: the first load of the event page (its coverage is computed then and cached);
 *  2. idle: one client, 30 loads each of the board, the event page and the references;
 *  3. crowd: 8 clients (4 keep-alive connections per page kind, each signed in as one of the
 *     people, round robin) load the board and the event page alternately and continuously for
 *     `PAGES_BENCH_SECONDS` (default 20 s);
 *  4. reference under the same crowd: 8 clients load `/favicon.svg` (a static file: the HTTP
 *     stack alone) and then `/api/v1/me` (the session lookup and one route: the floor of any
 *     signed-in page) for 5 s each.
 * A load of the event page is its HTML and then its sky view (`/events/{id}/sky/view`, whose address
 * the HTML holds), one after the other as the browser does; its time and bytes are the sum.
 * Printed per page: p50 / p99 / max latency, pages per second, bytes per page; the load
 * average beside it. Every answer must be 200 with the page's marker in it, else the run fails.
 *
 * `PAGES_BENCH_POINTINGS` changes the size of the crowded event (default 18,000).
 */
import { spawn, type ChildProcess } from 'node:child_process';
import http from 'node:http';
import { mkdtempSync, rmSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { inArray } from 'drizzle-orm';
import { median, type BenchResult } from './run.ts';
import { prepareAppWorld } from './live/app-world.ts';
import { freePort, nowMs, percentile } from './live/protocol.ts';
import { cpuSeconds, ensureBuilt, stop, waitForLine } from './live.bench.ts';
import { addCrowdOfPointings } from './pages/crowd.ts';
import { appProcessEnv } from '../../src/lib/server/platform/app-process.ts';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));
const CLIENTS = 8;
const CROWD_S = Number(process.env.PAGES_BENCH_SECONDS ?? 20);
const REFERENCE_S = 5;
const IDLE_LOADS = 30;
const POINTINGS = Number(process.env.PAGES_BENCH_POINTINGS ?? 18_000);
const HTTP_TIMEOUT_MS = 30_000;
const WATCHDOG_MS = 240_000;
const PEOPLE = ['coordinator@strainline.demo', 'duty@strainline.demo', 'observer@strainline.demo', 'observer2@strainline.demo', 'observer3@strainline.demo', 'viewer@strainline.demo'];

interface Load {
	ms: number;
	bytes: number;
	status: number;
	ok: boolean;
	error?: string;
}

interface Target {
	name: string;
	path: string;
	/** Text every good answer contains (a page that rendered an error would not). */
	marker: string;
	/**
	 * What the browser fetches next to show the page, found in its HTML (the event page's sky view):
	 * a load is both answers, one after the other, as the page is not whole before the second.
	 */
	then?: { name: string; find: RegExp; marker: string };
}

const agent = new http.Agent({ keepAlive: true, maxSockets: CLIENTS });

async function get(origin: string, t: Target, cookie: string): Promise<Load> {
	const first = await getOne(origin, t, cookie);
	if (!t.then || !first.ok) return first;
	const path = t.then.find.exec(first.body)?.[0];
	if (!path) return { ...first, ok: false, error: `no ${t.then.name} address in the page` };
	const second = await getOne(origin, { name: t.then.name, path, marker: t.then.marker }, cookie);
	return { ms: first.ms + second.ms, bytes: first.bytes + second.bytes, status: second.status, ok: second.ok, error: second.error };
}

function getOne(origin: string, t: Target, cookie: string, retried = false): Promise<Load & { body: string }> {
	const t0 = nowMs();
	return new Promise((resolve) => {
		const req = http.get(`${origin}${t.path}`, { agent, headers: { cookie, accept: 'text/html,*/*' } }, (res) => {
			const chunks: Buffer[] = [];
			res.on('data', (c: Buffer) => chunks.push(c));
			res.on('end', () => {
				const body = Buffer.concat(chunks);
				const ms = nowMs() - t0;
				const text = body.toString('utf8');
				const ok = res.statusCode === 200 && text.includes(t.marker);
				resolve({ ms, bytes: body.length, status: res.statusCode ?? 0, ok, error: ok ? undefined : text.slice(0, 300), body: text });
			});
		});
		req.setTimeout(HTTP_TIMEOUT_MS, () => req.destroy(new Error('request timed out')));
		req.on('error', (e) => {
			// A kept-alive socket the server closed just as the request left: browsers send it again.
			if ((e as NodeJS.ErrnoException).code === 'ECONNRESET' && req.reusedSocket && !retried) resolve(getOne(origin, t, cookie, true));
			else resolve({ ms: nowMs() - t0, bytes: 0, status: 0, ok: false, error: e.message, body: '' });
		});
	});
}

/** `clients` loops, each loading its targets in turn until `seconds` have passed. */
async function crowd(origin: string, targets: Target[], cookies: string[], seconds: number): Promise<{ byTarget: Map<string, Load[]>; wallS: number }> {
	const byTarget = new Map(targets.map((t) => [t.name, [] as Load[]]));
	const endMs = nowMs() + seconds * 1000;
	const t0 = nowMs();
	await Promise.all(
		Array.from({ length: CLIENTS }, async (_, c) => {
			for (let k = c; nowMs() < endMs; k++) {
				const t = targets[k % targets.length];
				byTarget.get(t.name)!.push(await get(origin, t, cookies[c % cookies.length]));
			}
		})
	);
	return { byTarget, wallS: (nowMs() - t0) / 1000 };
}

function summary(loads: Load[]): { p50: number; p99: number; max: number; bytes: number; failed: number } {
	const ms = loads.map((l) => l.ms);
	return { p50: median(ms), p99: percentile(ms, 99), max: percentile(ms, 100), bytes: median(loads.map((l) => l.bytes)), failed: loads.filter((l) => !l.ok).length };
}

const kB = (b: number) => `${(b / 1024).toFixed(1)} kB`;
const load = () =>
	loadavg()
		.map((l) => l.toFixed(1))
		.join(' / ');

export async function run(): Promise<BenchResult[]> {
	ensureBuilt();
	const dir = mkdtempSync(join(tmpdir(), 'strainline-pages-bench-'));
	const children = new Set<ChildProcess>();
	const watchdog = setTimeout(() => {
		process.stderr.write(`pages bench: watchdog after ${WATCHDOG_MS} ms, stopping the server\n`);
		for (const c of children) c.kill('SIGKILL');
	}, WATCHDOG_MS);
	watchdog.unref();
	try {
		const dbFile = join(dir, 'bench.sqlite');
		const storageDir = join(dir, 'files');
		const t0 = nowMs();
		const world = await prepareAppWorld(ROOT, dbFile, storageDir);
		// Pointings and sessions: a second connection to the same file, closed before the server starts.
		const { connect, useDatabase } = await import('../../src/lib/server/platform/db/index.ts');
		const auth = await import('../../src/lib/server/people/auth.ts');
		const table = await import('../../src/lib/server/platform/db/schema.ts');
		const database = connect(dbFile, join(ROOT, 'drizzle'));
		useDatabase(database);
		let cookies: string[];
		try {
			addCrowdOfPointings(database, world.eventId, { pointings: POINTINGS });
			const people = database.select({ id: table.user.id, email: table.user.email }).from(table.user).where(inArray(table.user.email, PEOPLE)).all();
			if (people.length !== PEOPLE.length) throw new Error('demo people missing');
			cookies = people.map((p) => {
				const token = auth.generateSessionToken();
				auth.createSession(token, p.id, { userAgent: 'pages bench' });
				return `${auth.SESSION_COOKIE}=${token}`;
			});
		} finally {
			database.$client.close();
		}
		process.stderr.write(`pages bench: event ${world.eventId} with ${POINTINGS} pointings, ${cookies.length} people signed in, ready in ${((nowMs() - t0) / 1000).toFixed(1)} s\n`);

		const port = await freePort();
		const origin = `http://127.0.0.1:${port}`;
		// PAGES_BENCH_NODE_ARGS: extra node flags for the server, e.g. "--cpu-prof --cpu-prof-dir=/tmp/prof".
		const nodeArgs = (process.env.PAGES_BENCH_NODE_ARGS ?? '').split(' ').filter(Boolean);
		const server = spawn(process.execPath, [...nodeArgs, 'server.js'], {
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
				SMTP_URL: ''
			}
		});
		children.add(server);
		try {
			await waitForLine(server, 'Strainline listening on', 30_000, 'app');
			const board: Target = { name: 'board', path: '/', marker: 'data-testid="event-count"' };
			const event: Target = {
				name: 'event page',
				path: `/events/${world.eventId}`,
				marker: `data-event-id="${world.eventId}"`,
				then: { name: 'sky view', find: /\/events\/[^"\\]+\/sky\/view\?v=[\d.]+/, marker: '"footprintCount"' }
			};
			const asset: Target = { name: 'static file', path: '/favicon.svg', marker: '<svg' };
			const me: Target = { name: 'GET /api/v1/me', path: '/api/v1/me', marker: '"user"' };

			const cold = await get(origin, event, cookies[0]);
			if (!cold.ok) throw new Error(`event page failed: HTTP ${cold.status} ${cold.error}`);
			process.stderr.write(`pages bench: cold event page ${cold.ms.toFixed(0)} ms, ${kB(cold.bytes)}; idle phase…\n`);

			const idle = new Map<string, Load[]>();
			for (const t of [board, event, asset, me]) {
				const loads: Load[] = [];
				for (let k = 0; k < IDLE_LOADS; k++) loads.push(await get(origin, t, cookies[k % cookies.length]));
				idle.set(t.name, loads);
			}
			const loadIdle = load();

			process.stderr.write(`pages bench: ${CLIENTS} clients × ${CROWD_S} s on the board and the event page…\n`);
			const cpu0 = cpuSeconds(server.pid);
			const pages = await crowd(origin, [board, event], cookies, CROWD_S);
			const serverCpuS = cpuSeconds(server.pid) - cpu0;
			const loadCrowd = load();
			const refAsset = await crowd(origin, [asset], cookies, REFERENCE_S);
			const refMe = await crowd(origin, [me], cookies, REFERENCE_S);

			const results: BenchResult[] = [];
			let failed = 0;
			const all = [...pages.byTarget.values()].flat();
			const perS = all.length / pages.wallS;
			for (const t of [board, event]) {
				const s = summary(pages.byTarget.get(t.name)!);
				const i = summary(idle.get(t.name)!);
				failed += s.failed + i.failed;
				results.push({
					suite: 'pages',
					name: `${t.name}, ${CLIENTS} clients: p50`,
					strainlineMs: s.p50,
					referenceMs: i.p50,
					reference: '1 client, idle: p50',
					note: `${kB(s.bytes)} per page; ${(pages.byTarget.get(t.name)!.length / pages.wallS).toFixed(1)}/s; load ${loadCrowd}`
				});
				results.push({
					suite: 'pages',
					name: `${t.name}, ${CLIENTS} clients: p99`,
					strainlineMs: s.p99,
					referenceMs: i.p99,
					reference: '1 client, idle: p99',
					note: `max ${s.max.toFixed(0)} ms; failures ${s.failed}`
				});
			}
			for (const [name, r] of [['static file', refAsset], ['GET /api/v1/me', refMe]] as const) {
				const s = summary(r.byTarget.get(name)!);
				const i = summary(idle.get(name)!);
				failed += s.failed + i.failed;
				results.push({
					suite: 'pages',
					name: `reference ${name}, ${CLIENTS} clients: p50 / p99`,
					strainlineMs: s.p50,
					referenceMs: s.p99,
					reference: 'the p99 of the same',
					note: `${(r.byTarget.get(name)!.length / r.wallS).toFixed(0)}/s; idle p50 ${i.p50.toFixed(1)} ms; ${kB(s.bytes)}`
				});
			}
			results.push({
				suite: 'pages',
				name: `event page with ${POINTINGS.toLocaleString('en-GB')} pointings, first load`,
				strainlineMs: cold.ms,
				note: `${kB(cold.bytes)}: HTML and the sky view`
			});
			// The server's own CPU per page: what a crowd costs, whatever else the machine is doing.
			results.push({
				suite: 'pages',
				name: `board + event page, ${CLIENTS} clients: server CPU per page`,
				strainlineMs: (serverCpuS * 1000) / all.length,
				note: `${all.length} pages; board alone idle p50 ${summary(idle.get('board')!).p50.toFixed(1)} ms, event page ${summary(idle.get('event page')!).p50.toFixed(1)} ms`
			});
			results.push({
				suite: 'pages',
				name: `board + event page, ${CLIENTS} clients: throughput`,
				strainlineMs: 1000 / perS,
				note: `${perS.toFixed(1)} pages/s (ms column: 1/throughput); server CPU ${serverCpuS.toFixed(1)} s in ${pages.wallS.toFixed(1)} s; ${cpus().length} cores; load idle ${loadIdle}, crowd ${loadCrowd}`
			});
			const bad = [...pages.byTarget.values(), ...idle.values()].flat().find((l) => !l.ok);
			if (failed) {
				process.stderr.write(`pages bench: ${failed} failed loads, e.g. HTTP ${bad?.status}: ${bad?.error}\n`);
				process.exitCode = 1;
			}
			return results;
		} finally {
			await stop(server, 5000);
			children.delete(server);
		}
	} finally {
		clearTimeout(watchdog);
		agent.destroy();
		for (const c of children) c.kill('SIGKILL');
		rmSync(dir, { recursive: true, force: true });
	}
}
