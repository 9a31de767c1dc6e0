/**
 * Live hub under load, through the app's real routes: the built app (`node server.js`, the
 * production entry) runs on a temporary seeded SQLite database; 300 socket.io clients
 * (websocket transport, API tokens of the demo people, 3 client processes of 100) are subscribed
 * to one event's room. A driver sends 20 actions per second for 60 s over loopback HTTP with real
 * API tokens, alternating
 *  - `POST /api/v1/events/{id}/claims` (a person's token; galaxy targets of the event's ranking,
 *    each claim a distinct (galaxy, filter, epoch) so every one is a 201), and
 *  - `POST /api/v1/observations` (the claiming telescope's own token), pointing at the galaxy of
 *    the previous pair's claim (sent ~100 ms before), so that it completes that claim.
 * A claim logs `claim.claimed`; an observation logs `claim.done` for each claim it completed and
 * then `observation.reported` — every one of them broadcast to `event:{id}` by `record()`.
 *
 * Latency per delivery = client receive time − the driver's send time of the request that caused
 * it (all processes share the machine's clock). Routes do not carry the driver's time, so a
 * delivery is traced by the id its payload names (claim id, observation id) to the HTTP response
 * that returned that id. The expected messages are what the server logged: every `event_log` row
 * of the room written during the run (read from the database file afterwards), cross-checked
 * against the ids the HTTP responses returned. Per client, each expected message must arrive
 * exactly once, in seq order, with the logged seq, and nothing else may arrive in the room.
 *
 * Reference in the same run: the same clients and driver against a bare socket.io server
 * (`live/bare-hub.ts`: no authentication, no database, no route), for 15 s at the same rate.
 *
 * Bounded: the app is built first when `build/` is older than the sources (callers hold the
 * shared build lock); after that a watchdog kills every child after 170 s. Connect timeout 30 s,
 * HTTP timeout 10 s, temporary database and storage. `LIVE_BENCH_SECONDS` shortens the main phase.
 */
import { fork, spawn, spawnSync, type ChildProcess } from 'node:child_process';
import http from 'node:http';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, statSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import Database from 'better-sqlite3';
import { median, type BenchResult } from './run.ts';
import { prepareAppWorld, type AppWorld } from './live/app-world.ts';
import { freePort, keyOf, nowMs, percentile, type ClientReport, type DriveRequest, type ExpectedMessage, type FromClients, type ToClients } from './live/protocol.ts';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));
const HERE = fileURLToPath(new URL('./live/', import.meta.url));
const CLIENTS = 300;
const CLIENT_PROCESSES = 3;
const RATE_PER_S = 20;
const MAIN_S = Number(process.env.LIVE_BENCH_SECONDS ?? 60);
const REFERENCE_S = Math.min(15, MAIN_S);
const CONNECT_TIMEOUT_MS = 30_000;
const HTTP_TIMEOUT_MS = 10_000;
const DRAIN_MS = 3000;
const WATCHDOG_MS = 170_000;
/** Epochs a claim may carry (the route accepts 1–100): distinct (galaxy, epoch) pairs keep every claim a 201. */
const MAX_EPOCH = 100;
const FILTER = 'r';

/** One request of the driver: when it left, how long its answer took, and the live messages it names. */
interface Sent {
	kind: 'claim' | 'observation' | 'bench';
	sentAtMs: number;
	httpMs: number;
	status: number;
	keys: string[];
	completed: number;
	/** The parsed answer (the reference hub answers with the seq it gave the message). */
	answer?: unknown;
	error?: string;
}

interface PhaseResult {
	latenciesMs: number[];
	expected: number;
	deliveries: number;
	sent: Sent[];
	lost: number;
	duplicated: number;
	outOfOrder: number;
	unexpected: number;
	seqMismatch: number;
	/** Keys the HTTP responses named that the event log does not hold once (app phase only). */
	notLoggedOnce: number;
	/** Event-log rows of the room that no request names (app phase only). */
	untraced: number;
	disconnects: number;
	presenceMessages: number;
	maxClientLagMs: number;
	connectMs: number;
	/** CPU seconds (user + system) the hub process used during the timed part. */
	hubCpuS: number;
	/** Wall seconds of the timed part (first request → last answer). */
	wallS: number;
}

// ─── Build and processes ───

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

export function ensureBuilt(): void {
	const handler = join(ROOT, 'build/handler.js');
	if (existsSync(handler) && statSync(handler).mtimeMs > newestSourceMs()) return;
	process.stderr.write('live bench: building the app (vite build)…\n');
	const r = spawnSync('npx', ['vite', 'build', '--logLevel', 'warn'], { cwd: ROOT, stdio: ['ignore', 'inherit', 'inherit'], timeout: 300_000 });
	if (r.status !== 0) throw new Error('vite build failed');
}

export function waitForLine(child: ChildProcess, text: string, ms: number, what: string): Promise<void> {
	return new Promise((resolve, reject) => {
		const timer = setTimeout(() => reject(new Error(`${what} not ready after ${ms} ms`)), ms);
		let buffer = '';
		const onData = (chunk: Buffer) => {
			buffer += chunk.toString();
			if (buffer.includes(text)) {
				clearTimeout(timer);
				child.stdout!.off('data', onData);
				// Keep draining: a full pipe would block the child.
				child.stdout!.resume();
				resolve();
			}
		};
		child.stdout!.on('data', onData);
		child.once('exit', (code) => reject(new Error(`${what} exited (${code}) before it was ready`)));
	});
}

function nextMessage(child: ChildProcess, ms: number): Promise<FromClients> {
	return new Promise((resolve, reject) => {
		const timer = setTimeout(() => reject(new Error(`client process silent for ${ms} ms`)), ms);
		child.once('message', (m: FromClients) => {
			clearTimeout(timer);
			resolve(m);
		});
	});
}

/** User + system CPU seconds of a process so far (Linux /proc; NaN elsewhere). */
export function cpuSeconds(pid: number | undefined): number {
	try {
		const fields = readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1].split(' ');
		// utime and stime are fields 14 and 15 of stat, in clock ticks (100 per second on Linux).
		return (Number(fields[11]) + Number(fields[12])) / 100;
	} catch {
		return NaN;
	}
}

export function stop(child: ChildProcess, ms: number): Promise<void> {
	if (child.exitCode !== null || child.signalCode !== null) return Promise.resolve();
	return new Promise((resolve) => {
		const timer = setTimeout(() => child.kill('SIGKILL'), ms);
		child.once('exit', () => {
			clearTimeout(timer);
			resolve();
		});
		child.kill('SIGTERM');
	});
}

// ─── HTTP ───

const agent = new http.Agent({ keepAlive: true, maxSockets: 8 });

function postJson(url: string, token: string | null, body: unknown): Promise<{ status: number; body: unknown }> {
	return new Promise((resolve, reject) => {
		const data = JSON.stringify(body);
		const headers: Record<string, string | number> = { 'content-type': 'application/json', 'content-length': Buffer.byteLength(data) };
		if (token) headers.authorization = `Bearer ${token}`;
		const req = http.request(url, { method: 'POST', agent, headers }, (res) => {
			let text = '';
			res.setEncoding('utf8');
			res.on('data', (c: string) => (text += c));
			res.on('end', () => {
				let parsed: unknown = text;
				try {
					parsed = JSON.parse(text);
				} catch {
					// Not JSON (an HTML error page): kept as text for the error message.
				}
				resolve({ status: res.statusCode ?? 0, body: parsed });
			});
		});
		req.setTimeout(HTTP_TIMEOUT_MS, () => req.destroy(new Error('request timed out')));
		req.on('error', reject);
		req.end(data);
	});
}

/** Send one request and note its timing and the live-message keys its answer names. */
async function timed(kind: Sent['kind'], url: string, token: string | null, body: unknown, keysOf: (answer: unknown) => string[]): Promise<Sent> {
	const sentAtMs = nowMs();
	try {
		const r = await postJson(url, token, body);
		const httpMs = nowMs() - sentAtMs;
		const ok = kind === 'bench' ? r.status === 200 : r.status === 201;
		if (!ok) return { kind, sentAtMs, httpMs, status: r.status, keys: [], completed: 0, error: JSON.stringify(r.body).slice(0, 200) };
		const keys = keysOf(r.body);
		return { kind, sentAtMs, httpMs, status: r.status, keys, completed: kind === 'observation' ? keys.length - 1 : 0, answer: r.body };
	} catch (e) {
		return { kind, sentAtMs, httpMs: nowMs() - sentAtMs, status: 0, keys: [], completed: 0, error: (e as Error).message };
	}
}

// ─── Drivers ───

type Driver = (k: number) => Promise<Sent>;

/** Action k of the app phase: even k a claim, odd k an observation of the previous pair's claim. */
function appDriver(origin: string, w: AppWorld): Driver {
	const g = w.targets.length;
	const claimOf = (pair: number) => ({
		target: w.targets[pair % g],
		epoch: 1 + Math.floor(pair / g),
		telescope: w.telescopes[pair % w.telescopes.length],
		claimerToken: w.claimerTokens[(pair >> 1) % w.claimerTokens.length]
	});
	return (k) => {
		const pair = k >> 1;
		if (k % 2 === 0) {
			const c = claimOf(pair);
			const body = { targetKind: 'galaxy', targetId: String(c.target.galaxyId), filter: FILTER, epoch: c.epoch, telescopeId: c.telescope.id };
			return timed('claim', `${origin}/api/v1/events/${w.eventId}/claims`, c.claimerToken, body, (a) => [`claim.claimed|${(a as { claim: { id: string } }).claim.id}`]);
		}
		// The previous pair's claim has had ~100 ms more to be committed than this pair's.
		const c = claimOf(Math.max(0, pair - 1));
		const body = {
			eventId: w.eventId,
			observedAt: new Date(Date.now() - 30_000).toISOString(),
			raDeg: c.target.raDeg,
			decDeg: c.target.decDeg,
			filter: FILTER,
			exposureS: 120,
			limitingMag: 20.5,
			seeingArcsec: 1.3
		};
		return timed('observation', `${origin}/api/v1/observations`, c.telescope.token, body, (a) => {
			const out = a as { observation: { id: string }; completedClaimIds: string[] };
			return [...out.completedClaimIds.map((id) => `claim.done|${id}`), `observation.reported|${out.observation.id}`];
		});
	};
}

function bareDriver(origin: string, room: string): Driver {
	return (k) => {
		const type = k % 2 === 0 ? 'bench.claim' : 'bench.observation';
		const body: DriveRequest = { room, type, payload: { k, filter: FILTER, note: 'reference' } };
		return timed('bench', `${origin}/bench/action`, null, body, () => [`${type}|${k}`]);
	};
}

/** Expected messages of the bare phase: one per action, with the seq the hub answered. */
function bareExpected(sent: Sent[]): { expected: ExpectedMessage[]; notLoggedOnce: number; untraced: number } {
	const expected = sent.flatMap((s) => s.keys.map((key) => ({ key, seq: (s.answer as { seq: number }).seq, sentAtMs: s.sentAtMs })));
	return { expected, notLoggedOnce: 0, untraced: 0 };
}

/** Expected messages of the app phase: the room's event-log rows after `afterSeq`, traced to the requests. */
function loggedExpected(dbFile: string, room: string, afterSeq: number, sent: Sent[]): { expected: ExpectedMessage[]; notLoggedOnce: number; untraced: number } {
	const sqlite = new Database(dbFile, { readonly: true, fileMustExist: true });
	let rows: { seq: number; action: string; payload: string }[];
	try {
		rows = sqlite.prepare('SELECT seq, action, payload FROM event_log WHERE room = ? AND seq > ? ORDER BY seq').all(room, afterSeq) as typeof rows;
	} finally {
		sqlite.close();
	}
	const sentAt = new Map<string, number>();
	for (const s of sent) for (const key of s.keys) sentAt.set(key, s.sentAtMs);
	const logged = new Map<string, number>();
	let untraced = 0;
	const expected: ExpectedMessage[] = [];
	for (const r of rows) {
		const key = keyOf(r.action, JSON.parse(r.payload) as Record<string, unknown>) ?? `untraceable|${r.seq}`;
		logged.set(key, (logged.get(key) ?? 0) + 1);
		const at = sentAt.get(key);
		if (at === undefined) untraced++;
		expected.push({ key, seq: r.seq, sentAtMs: at ?? null });
	}
	let notLoggedOnce = 0;
	for (const key of sentAt.keys()) if (logged.get(key) !== 1) notLoggedOnce++;
	return { expected, notLoggedOnce, untraced };
}

function latestSeq(dbFile: string): number {
	const sqlite = new Database(dbFile, { readonly: true, fileMustExist: true });
	try {
		return (sqlite.prepare('SELECT coalesce(max(seq), 0) AS n FROM event_log').get() as { n: number }).n;
	} finally {
		sqlite.close();
	}
}

// ─── One phase ───

interface PhaseSetup {
	start: (port: number) => ChildProcess;
	readyLine: string;
	room: string;
	tokens: string[];
	driver: (origin: string) => Driver;
	/** Called before the first action; returns what computes the expected messages afterwards. */
	before: () => (sent: Sent[]) => { expected: ExpectedMessage[]; notLoggedOnce: number; untraced: number };
}

async function phase(label: string, seconds: number, setup: PhaseSetup, children: Set<ChildProcess>): Promise<PhaseResult> {
	const port = await freePort();
	const origin = `http://127.0.0.1:${port}`;
	const hub = setup.start(port);
	children.add(hub);
	const clientProcs: ChildProcess[] = [];
	try {
		await waitForLine(hub, setup.readyLine, 30_000, label);
		for (let p = 0; p < CLIENT_PROCESSES; p++) {
			const child = fork(join(HERE, 'clients.ts'), [], { cwd: ROOT, execArgv: ['--import', 'tsx'], stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
			children.add(child);
			clientProcs.push(child);
		}
		const t0 = nowMs();
		const ready = clientProcs.map((c, p) => {
			const answer = nextMessage(c, CONNECT_TIMEOUT_MS + 5000);
			const count = Math.floor(CLIENTS / CLIENT_PROCESSES) + (p < CLIENTS % CLIENT_PROCESSES ? 1 : 0);
			// Rotate the tokens per process so that every person has connections in every process.
			const rotated = setup.tokens.map((_, k) => setup.tokens[(k + p) % setup.tokens.length]);
			c.send({ cmd: 'connect', origin, room: setup.room, tokens: rotated, count, connectTimeoutMs: CONNECT_TIMEOUT_MS } satisfies ToClients);
			return answer;
		});
		for (const m of await Promise.all(ready)) if (m.ev !== 'ready') throw new Error(`clients failed to connect: ${m.ev === 'failed' ? m.error : m.ev}`);
		const connectMs = nowMs() - t0;
		// Let the presence burst of 300 joins settle before timing.
		await new Promise((r) => setTimeout(r, 1000));

		const expectedOf = setup.before();
		const drive = setup.driver(origin);
		const total = RATE_PER_S * seconds;
		const intervalMs = 1000 / RATE_PER_S;
		const pending: Promise<Sent>[] = [];
		const cpu0 = cpuSeconds(hub.pid);
		const start = nowMs() + 50;
		for (let k = 0; k < total; k++) {
			const wait = start + k * intervalMs - nowMs();
			if (wait > 0) await new Promise((r) => setTimeout(r, wait));
			pending.push(drive(k));
		}
		const sent = await Promise.all(pending);
		const wallS = (nowMs() - start) / 1000;
		const hubCpuS = cpuSeconds(hub.pid) - cpu0;
		await new Promise((r) => setTimeout(r, DRAIN_MS));
		const { expected, notLoggedOnce, untraced } = expectedOf(sent);

		const reports = await Promise.all(
			clientProcs.map(async (c) => {
				const answer = nextMessage(c, 30_000);
				c.send({ cmd: 'report', expected } satisfies ToClients);
				const m = await answer;
				if (m.ev !== 'report') throw new Error('client process did not report');
				return m.report;
			})
		);
		const sum = (f: (r: ClientReport) => number) => reports.reduce((n, r) => n + f(r), 0);
		return {
			latenciesMs: reports.flatMap((r) => r.latenciesMs),
			expected: expected.length,
			deliveries: sum((r) => r.deliveries),
			sent,
			lost: sum((r) => r.lost),
			duplicated: sum((r) => r.duplicated),
			outOfOrder: sum((r) => r.outOfOrder),
			unexpected: sum((r) => r.unexpected),
			seqMismatch: sum((r) => r.seqMismatch),
			notLoggedOnce,
			untraced,
			disconnects: sum((r) => r.disconnects),
			presenceMessages: sum((r) => r.presenceMessages),
			maxClientLagMs: reports.reduce((m, r) => Math.max(m, r.maxLoopLagMs), 0),
			connectMs,
			hubCpuS,
			wallS
		};
	} finally {
		for (const c of clientProcs) {
			if (c.exitCode === null && c.connected) c.send({ cmd: 'close' } satisfies ToClients);
		}
		await Promise.all(clientProcs.map((c) => stop(c, 3000)));
		await stop(hub, 5000);
		for (const c of [hub, ...clientProcs]) children.delete(c);
	}
}

// ─── Reporting ───

const failures = (r: PhaseResult) => r.sent.filter((s) => s.error);
const httpMs = (r: PhaseResult, kind: Sent['kind']) => r.sent.filter((s) => s.kind === kind && !s.error).map((s) => s.httpMs);

function describe(r: PhaseResult): string {
	const failed = failures(r).length;
	return (
		`${r.deliveries} deliveries of ${r.expected} logged messages × ${CLIENTS} clients; lost ${r.lost}, duplicated ${r.duplicated}, out of order ${r.outOfOrder}` +
		(r.unexpected ? `, unexpected ${r.unexpected}` : '') +
		(r.seqMismatch ? `, seq mismatch ${r.seqMismatch}` : '') +
		(failed ? `, HTTP failures ${failed}` : '') +
		`; disconnects ${r.disconnects}; max ${percentile(r.latenciesMs, 100).toFixed(1)} ms`
	);
}

/** Request time by 10-s window of the run (p50 / max, ms): shows whether the tail is spread or a few stalls. */
function timeline(r: PhaseResult): string {
	const t0 = Math.min(...r.sent.map((s) => s.sentAtMs));
	const windows: number[][] = [];
	for (const s of r.sent) (windows[Math.floor((s.sentAtMs - t0) / 10_000)] ??= []).push(s.httpMs);
	return windows.map((w, k) => `${k * 10}s ${median(w).toFixed(0)}/${Math.max(...w).toFixed(0)}`).join(', ');
}

function checkPhase(name: string, r: PhaseResult): void {
	const failed = failures(r);
	for (const f of failed.slice(0, 5)) process.stderr.write(`live bench ${name}: ${f.kind} → HTTP ${f.status}: ${f.error}\n`);
	if (
		failed.length ||
		r.lost ||
		r.duplicated ||
		r.outOfOrder ||
		r.unexpected ||
		r.seqMismatch ||
		r.notLoggedOnce ||
		r.untraced ||
		r.disconnects ||
		r.deliveries !== r.expected * CLIENTS
	) {
		process.stderr.write(`live bench ${name}: DELIVERY CHECK FAILED\n`);
		process.exitCode = 1;
	}
}

export async function run(): Promise<BenchResult[]> {
	ensureBuilt();
	const dir = mkdtempSync(join(tmpdir(), 'strainline-live-bench-'));
	const children = new Set<ChildProcess>();
	const watchdog = setTimeout(() => {
		process.stderr.write(`live bench: watchdog after ${WATCHDOG_MS} ms, stopping every child\n`);
		for (const c of children) c.kill('SIGKILL');
	}, WATCHDOG_MS);
	watchdog.unref();
	try {
		const dbFile = join(dir, 'bench.sqlite');
		const storageDir = join(dir, 'files');
		const t0 = nowMs();
		const world = await prepareAppWorld(ROOT, dbFile, storageDir);
		const pairs = (RATE_PER_S * MAIN_S) / 2;
		if (pairs > world.targets.length * MAX_EPOCH) throw new Error(`${pairs} claims need more than ${world.targets.length} galaxies × ${MAX_EPOCH} epochs`);
		process.stderr.write(
			`live bench: event ${world.eventId} with ${world.targets.length} ranked galaxies ready in ${((nowMs() - t0) / 1000).toFixed(1)} s; ` +
				`${CLIENTS} clients × ${RATE_PER_S} actions/s × ${MAIN_S} s on the app's routes…\n`
		);
		const room = `event:${world.eventId}`;
		const ours = await phase(
			'app',
			MAIN_S,
			{
				start: (port) =>
					spawn(process.execPath, ['server.js'], {
						cwd: ROOT,
						stdio: ['ignore', 'pipe', 'inherit'],
						env: {
							...process.env,
							PORT: String(port),
							HOST: '127.0.0.1',
							ORIGIN: `http://127.0.0.1:${port}`,
							DATABASE_URL: dbFile,
							STORAGE_DIR: storageDir,
							VTP_BROKER: '',
							VTP_ARCHIVE_URL: '',
							FAKE_SMTP_PORT: '0',
							SMTP_URL: ''
						}
					}),
				readyLine: 'Strainline listening on',
				room,
				tokens: world.listenerTokens,
				driver: (origin) => appDriver(origin, world),
				before: () => {
					const afterSeq = latestSeq(dbFile);
					return (sent) => loggedExpected(dbFile, room, afterSeq, sent);
				}
			},
			children
		);
		process.stderr.write(`live bench: reference, bare socket.io, ${REFERENCE_S} s…\n`);
		const bare = await phase(
			'bare hub',
			REFERENCE_S,
			{
				start: (port) => spawn(process.execPath, ['--import', 'tsx', join(HERE, 'bare-hub.ts')], { cwd: ROOT, stdio: ['ignore', 'pipe', 'inherit'], env: { ...process.env, PORT: String(port) } }),
				readyLine: 'ready',
				room,
				tokens: world.listenerTokens,
				driver: (origin) => bareDriver(origin, room),
				before: () => bareExpected
			},
			children
		);
		const load = loadavg()
			.map((l) => l.toFixed(1))
			.join(' / ');
		const claims = httpMs(ours, 'claim');
		const observations = httpMs(ours, 'observation');
		const refPost = httpMs(bare, 'bench');
		const completed = ours.sent.reduce((n, s) => n + s.completed, 0);
		for (const [name, r] of [['app', ours], ['bare', bare]] as const) {
			process.stderr.write(
				`live bench ${name}: ${describe(r)}; connect ${r.connectMs.toFixed(0)} ms; presence messages ${r.presenceMessages}; ` +
					`max client loop lag ${r.maxClientLagMs.toFixed(1)} ms; hub CPU ${r.hubCpuS.toFixed(1)} s in ${r.wallS.toFixed(1)} s; ` +
					`HTTP p50/max by 10 s: ${timeline(r)}` +
					(name === 'app' ? `; untraced log rows ${r.untraced}; response ids not logged exactly once ${r.notLoggedOnce}; claims completed by observations ${completed}` : '') +
					'\n'
			);
			checkPhase(name, r);
		}
		const reference = `bare socket.io (no auth, DB, route), ${REFERENCE_S} s`;
		const p99 = percentile(ours.latenciesMs, 99);
		const run = `${CLIENTS} clients, ${RATE_PER_S} actions/s, ${MAIN_S} s`;
		const actions = `${claims.length} claims + ${observations.length} observations → ${ours.expected} messages`;
		return [
			{ suite: 'live', name: `${run}: broadcast latency p50`, strainlineMs: median(ours.latenciesMs), referenceMs: median(bare.latenciesMs), reference, note: describe(ours) },
			{ suite: 'live', name: `${run}: broadcast latency p95`, strainlineMs: percentile(ours.latenciesMs, 95), referenceMs: percentile(bare.latenciesMs, 95), reference, note: actions },
			{
				suite: 'live',
				name: `${run}: broadcast latency p99`,
				strainlineMs: p99,
				referenceMs: percentile(bare.latenciesMs, 99),
				reference,
				note: `goal < 150 ms: ${p99 < 150 ? 'met' : 'NOT met'}; reference: ${describe(bare)}`
			},
			{ suite: 'live', name: 'HTTP POST claim (201), p50', strainlineMs: median(claims), referenceMs: median(refPost), reference: 'bare POST → emit → 200, p50', note: `n=${claims.length}` },
			{ suite: 'live', name: 'HTTP POST claim (201), p99', strainlineMs: percentile(claims, 99), referenceMs: percentile(refPost, 99), reference: 'bare POST, p99', note: `max ${percentile(claims, 100).toFixed(1)} ms` },
			{
				suite: 'live',
				name: 'HTTP POST observation (201), p50',
				strainlineMs: median(observations),
				referenceMs: median(refPost),
				reference: 'bare POST → emit → 200, p50',
				note: `n=${observations.length}; ${completed} claims completed`
			},
			{
				suite: 'live',
				name: 'HTTP POST observation (201), p99',
				strainlineMs: percentile(observations, 99),
				referenceMs: percentile(refPost, 99),
				reference: 'bare POST, p99',
				note: `max ${percentile(observations, 100).toFixed(1)} ms; ${cpus().length} cores, load ${load}`
			}
		];
	} finally {
		clearTimeout(watchdog);
		agent.destroy();
		for (const c of children) c.kill('SIGKILL');
		rmSync(dir, { recursive: true, force: true });
	}
}
