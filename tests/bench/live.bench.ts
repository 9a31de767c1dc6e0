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
 * Added load (`live/added-load.ts`): before the app starts, a synthetic catalogue of 10⁶ galaxies
 * is imported through the app's catalogue import and the event ranked against it. At LOAD_AT_S of
 * the main phase, while the driver keeps its pace, the fake alert broker publishes an update notice
 * for the event whose sky map is a flat nside-1024 map (100 MB, gzip) on the broker's HTTP server —
 * the app fetches, analyses and re-ranks — and a demo observer POSTs a 9,000-row pointing CSV
 * (logged as one `observation.uploaded` message, and a `claim.done` per claim it completed).
 * The driver's messages are grouped by when their request left: before the load ("quiet", the
 * reference for the loaded part in the same run), from the load's start until its last message was
 * logged ("loaded"), and after. The update's and the upload's own messages are checked for loss
 * too and reported apart (the upload's latency counts from the POST, so it includes the upload).
 *
 * Reference in the same run: the same clients and driver against a bare socket.io server
 * (`live/bare-hub.ts`: no authentication, no database, no route), for 15 s at the same rate.
 *
 * Bounded: the app is built first when `build/` is older than the sources (callers hold the
 * shared build lock); once the world is ready a watchdog kills every child after 300 s. Connect
 * timeout 30 s, HTTP timeout 10 s (240 s for the upload), temporary database and storage.
 * `LIVE_BENCH_SECONDS` shortens the main phase; `LIVE_BENCH_CATALOG_ROWS=0` and
 * `LIVE_BENCH_ADDED_LOAD=0` leave out the catalogue and the added load; `LIVE_BENCH_NODE_ARGS`
 * passes flags to the app's node (a CPU profile, say).
 */
import { fork, spawn, spawnSync, type ChildProcess } from 'node:child_process';
import http from 'node:http';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, statSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import Database from 'better-sqlite3';
import { median, type BenchResult } from './run.ts';
import { startBroker, type FakeBroker } from '../../fake-alert-broker/broker.ts';
import { prepareAppWorld, type AppWorld } from './live/app-world.ts';
import { flatMapFits, pointingsCsv, updateNoticeXml } from './live/added-load.ts';
import { freePort, keyOf, nowMs, percentile, type ClientReport, type DriveRequest, type ExpectedMessage, type FromClients, type ToClients } from './live/protocol.ts';
import { appProcessEnv } from '../../src/lib/server/platform/app-process.ts';

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
const WATCHDOG_MS = 480_000;
const CATALOG_ROWS = Number(process.env.LIVE_BENCH_CATALOG_ROWS ?? 1_000_000);
const ADDED_LOAD = process.env.LIVE_BENCH_ADDED_LOAD !== '0';
/** Second of the main phase at which the update notice and the upload go out. */
const LOAD_AT_S = Math.min(20, Math.floor(MAIN_S / 3));
const CSV_ROWS = 9000;
const UPLOAD_TIMEOUT_MS = 240_000;
const SETTLED_MS = 100;
const SETTLE_MAX_MS = 60_000;
/** How long after the driver's last request the update may still take to be ranked. */
const UPDATE_WAIT_MS = 90_000;
/** The flat map's file on the broker's HTTP server. */
const FLAT_MAP_NAME = 'bench-update.flat.fits';
/** The app's sky-map size cap for the main phase, MB: the default (64) refuses a 100 MB flat nside-1024 map. */
const SKYMAP_MAX_MB = 128;
/** Epochs a claim may carry (the route accepts 1–100): distinct (galaxy, epoch) pairs keep every claim a 201. */
const MAX_EPOCH = 100;
const FILTER = 'r';

/** One request of the driver: when it left, how long its answer took, and the live messages it names. */
interface Sent {
	kind: 'claim' | 'observation' | 'bench' | 'upload';
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
	/** Per group of expected messages (quiet / loaded / after / upload / update; 'all' without load). */
	groups: Record<string, { latenciesMs: number[]; lost: number; expected: number }>;
	load: LoadOutcome | null;
}

/** What the added load did, on the wall clock of the driver. */
interface LoadOutcome {
	startedAtMs: number;
	upload: Sent;
	uploadRows: number;
	publish: { ackedAtMs: number | null; error?: string };
	/** Logged times (event_log.created_at) of the update's messages in the event room, by action. */
	updateLogged: { action: string; atMs: number }[];
	/** End of the loaded window: the upload's answer or the update's last logged message, the later. */
	endAtMs: number;
	/** Whether the update's ranking (or a failure) was logged before the bench stopped waiting. */
	settled: boolean;
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

// Enough sockets that a stalled server, not the driver's own pool, decides when a request is answered
// (a queued request's timeout would only start once it had a socket).
const agent = new http.Agent({ keepAlive: true, maxSockets: 64 });
/** The upload is another person's request: its own connection, not one of the driver's. */
const uploadAgent = new http.Agent({ keepAlive: false, maxSockets: 1 });

/** POST JSON, or text as it is when `body` is `{ csv }` (sent as text/csv). */
function postJson(url: string, token: string | null, body: unknown): Promise<{ status: number; body: unknown }> {
	return new Promise((resolve, reject) => {
		const csv = typeof body === 'object' && body !== null && 'csv' in body ? String((body as { csv: string }).csv) : null;
		const data = csv ?? JSON.stringify(body);
		const headers: Record<string, string | number> = { 'content-type': csv === null ? 'application/json' : 'text/csv', 'content-length': Buffer.byteLength(data) };
		if (token) headers.authorization = `Bearer ${token}`;
		const req = http.request(url, { method: 'POST', agent: csv === null ? agent : uploadAgent, headers }, (res) => {
			let text = '';
			res.on('error', (e) => {
				clearTimeout(timer);
				reject(e);
			});
			res.setEncoding('utf8');
			res.on('data', (c: string) => (text += c));
			res.on('end', () => {
				let parsed: unknown = text;
				try {
					parsed = JSON.parse(text);
				} catch {
					// Not JSON (an HTML error page): kept as text for the error message.
				}
				clearTimeout(timer);
				resolve({ status: res.statusCode ?? 0, body: parsed });
			});
		});
		// Counted from the send, not from when a socket was free: a stalled server cannot hold the driver past it.
		const timer = setTimeout(() => req.destroy(new Error('request timed out')), csv === null ? HTTP_TIMEOUT_MS : UPLOAD_TIMEOUT_MS);
		req.on('error', (e) => {
			clearTimeout(timer);
			reject(e);
		});
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
		if (!ok) return { kind, sentAtMs, httpMs, status: r.status, keys: [], completed: 0, error: JSON.stringify(r.body).slice(0, 300) };
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

type ExpectedOf = (sent: Sent[], load: LoadOutcome | null) => { expected: ExpectedMessage[]; notLoggedOnce: number; untraced: number };

/** A claim or observation message no request of the driver or the upload names is a failure; anything else the load caused. */
const isDriverAction = (action: string) => /^(claim|observation)\./.test(action);

interface LogRow {
	seq: number;
	action: string;
	payload: string;
	createdAt: number;
}

function roomRows(dbFile: string, room: string, afterSeq: number): LogRow[] {
	const sqlite = new Database(dbFile, { readonly: true, fileMustExist: true });
	try {
		return sqlite.prepare('SELECT seq, action, payload, created_at AS createdAt FROM event_log WHERE room = ? AND seq > ? ORDER BY seq').all(room, afterSeq) as LogRow[];
	} finally {
		sqlite.close();
	}
}

/**
 * Expected messages of the app phase: the room's event-log rows after `afterSeq`, traced to the
 * requests, and grouped by the added load's window when there was one.
 */
function loggedExpected(dbFile: string, room: string, afterSeq: number, sent: Sent[], load: LoadOutcome | null): ReturnType<ExpectedOf> {
	const rows = roomRows(dbFile, room, afterSeq);
	const sentAt = new Map<string, number>();
	for (const s of [...sent, ...(load ? [load.upload] : [])]) for (const key of s.keys) sentAt.set(key, s.sentAtMs);
	const uploadKeys = new Set(load?.upload.keys ?? []);
	const logged = new Map<string, number>();
	let untraced = 0;
	const expected: ExpectedMessage[] = [];
	for (const r of rows) {
		const key = keyOf(r.action, JSON.parse(r.payload) as Record<string, unknown>, r.seq) ?? `untraceable|${r.seq}`;
		logged.set(key, (logged.get(key) ?? 0) + 1);
		const at = sentAt.get(key);
		if (at === undefined && isDriverAction(r.action)) untraced++;
		const group = (): string => {
			if (load === null) return 'all';
			if (uploadKeys.has(key)) return 'upload';
			// Logged without an answer naming it (a request that timed out): counted, never timed.
			if (at === undefined) return isDriverAction(r.action) ? 'untraced' : 'update';
			return at < load.startedAtMs ? 'quiet' : at <= load.endAtMs ? 'loaded' : 'after';
		};
		expected.push({ key, seq: r.seq, sentAtMs: at ?? null, group: group() });
	}
	let notLoggedOnce = 0;
	for (const key of sentAt.keys()) if (logged.get(key) !== 1) notLoggedOnce++;
	return { expected, notLoggedOnce, untraced };
}

/**
 * Wait until the app answers a cheap read three times in a row within SETTLED_MS (a freshly started
 * app with a 10⁶-galaxy catalogue may still be busy), at most SETTLE_MAX_MS; says how long it took.
 */
async function settled(url: string, token: string): Promise<void> {
	const t0 = nowMs();
	let good = 0;
	while (good < 3 && nowMs() - t0 < SETTLE_MAX_MS) {
		const t = nowMs();
		const status = await new Promise<number>((resolve) => {
			const req = http.get(url, { agent, headers: { authorization: `Bearer ${token}` } }, (res) => {
				res.resume();
				res.on('end', () => resolve(res.statusCode ?? 0));
			});
			req.setTimeout(HTTP_TIMEOUT_MS, () => req.destroy());
			req.on('error', () => resolve(0));
		});
		good = status === 200 && nowMs() - t < SETTLED_MS ? good + 1 : 0;
		if (good < 3) await new Promise((r) => setTimeout(r, 200));
	}
	process.stderr.write(`live bench: app ${good >= 3 ? 'settled' : 'NOT settled'} after ${((nowMs() - t0) / 1000).toFixed(1)} s (three reads under ${SETTLED_MS} ms)\n`);
}

/**
 * Start the added load: publish the update notice and POST the pointing CSV at once, then wait
 * until the upload has answered and the update's ranking (or its failure) is logged in the room.
 */
async function addedLoad(origin: string, w: AppWorld, broker: FakeBroker, dbFile: string, room: string, afterSeq: number): Promise<LoadOutcome> {
	const centre = { raDeg: w.notice.antiSunRaDeg, decDeg: -20 };
	const csv = pointingsCsv(w, CSV_ROWS, centre);
	const xml = updateNoticeXml(w, `${broker.httpBase}/skymaps/${FLAT_MAP_NAME}`);
	const startedAtMs = nowMs();
	const publish = broker.publish(xml).then(
		(r) => (r.acked > 0 ? { ackedAtMs: nowMs() } : { ackedAtMs: null, error: `published to ${r.delivered} subscriber(s), acked by ${r.acked}` }),
		(e: Error) => ({ ackedAtMs: null, error: e.message })
	);
	const upload = timed('upload', `${origin}/api/v1/observations?eventId=${encodeURIComponent(w.eventId)}&telescopeId=${encodeURIComponent(w.uploader.telescope.id)}`, w.uploader.token, { csv }, (a) => {
		// One `observation.uploaded` for the whole file (coordination/observations.ts reportMany), and a claim.done per claim it completed.
		const out = a as { results: { observation: { id: string }; completedClaimIds: string[] }[] };
		return [...out.results.flatMap((r) => r.completedClaimIds.map((id) => `claim.done|${id}`)), `observation.uploaded|${w.uploader.telescope.id}|${out.results.length}`];
	});
	const since = (t: number) => `${((t - startedAtMs) / 1000).toFixed(1)} s`;
	void upload.then((u) => process.stderr.write(`live bench: upload answered HTTP ${u.status} after ${since(u.sentAtMs + u.httpMs)}${u.error ? `: ${u.error}` : ''}\n`));
	void publish.then((p) => process.stderr.write(`live bench: update notice ${p.ackedAtMs ? `acked after ${since(p.ackedAtMs)}` : `not acked: ${p.error}`}\n`));
	const [up, pub] = await Promise.all([upload, publish]);
	const deadline = startedAtMs + MAIN_S * 1000 + UPDATE_WAIT_MS;
	const said = new Set<number>();
	let updateLogged: { action: string; atMs: number }[] = [];
	let settled = false;
	while (nowMs() < deadline) {
		updateLogged = roomRows(dbFile, room, afterSeq)
			.filter((r) => !isDriverAction(r.action) && r.createdAt >= startedAtMs - 1000)
			.map((r) => ({ action: r.action, atMs: r.createdAt }));
		updateLogged.forEach((u, k) => {
			if (!said.has(k)) process.stderr.write(`live bench: ${u.action} logged after ${since(u.atMs)}\n`);
			said.add(k);
		});
		settled = updateLogged.some((u) => u.action === 'targets.ranked' || u.action === 'skymap.failed');
		if (settled || pub.error) break;
		await new Promise((r) => setTimeout(r, 250));
	}
	const endAtMs = Math.max(up.sentAtMs + up.httpMs, ...updateLogged.map((u) => u.atMs));
	return { startedAtMs, upload: up, uploadRows: CSV_ROWS, publish: pub, updateLogged, endAtMs, settled };
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
	before: () => ExpectedOf;
	/** Awaited once the clients are connected, before timing starts (e.g. the app subscribed to the broker). */
	ready?: (origin: string) => Promise<void>;
	/** Heavy work started at action `atAction` while the driver keeps its pace; awaited before the drain. */
	load?: { atAction: number; run: (origin: string) => Promise<LoadOutcome> };
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
			// A client killed by the watchdog must not crash the orchestrator on its next send.
			child.on('error', (e) => process.stderr.write(`live bench: client process: ${e.message}\n`));
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
		await setup.ready?.(origin);
		// Let the presence burst of 300 joins settle before timing.
		await new Promise((r) => setTimeout(r, 1000));

		const expectedOf = setup.before();
		const drive = setup.driver(origin);
		const total = RATE_PER_S * seconds;
		const intervalMs = 1000 / RATE_PER_S;
		const pending: Promise<Sent>[] = [];
		const cpu0 = cpuSeconds(hub.pid);
		const start = nowMs() + 50;
		let loading: Promise<LoadOutcome> | null = null;
		for (let k = 0; k < total; k++) {
			const wait = start + k * intervalMs - nowMs();
			if (wait > 0) await new Promise((r) => setTimeout(r, wait));
			if (setup.load && k === setup.load.atAction) loading = setup.load.run(origin);
			pending.push(drive(k));
		}
		const sent = await Promise.all(pending);
		const load = loading ? await loading : null;
		const wallS = (nowMs() - start) / 1000;
		const hubCpuS = cpuSeconds(hub.pid) - cpu0;
		await new Promise((r) => setTimeout(r, DRAIN_MS));
		const { expected, notLoggedOnce, untraced } = expectedOf(sent, load);

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
		const groups: PhaseResult['groups'] = {};
		for (const r of reports)
			for (const [name, g] of Object.entries(r.groups)) {
				const into = (groups[name] ??= { latenciesMs: [], lost: 0, expected: 0 });
				into.latenciesMs.push(...g.latenciesMs);
				into.lost += g.lost;
				into.expected += g.expected;
			}
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
			wallS,
			groups,
			load
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

/** The loaded window against the quiet part of the same run, and what the added load itself took. */
function addedLoadRows(r: PhaseResult, load: string): BenchResult[] {
	const l = r.load;
	if (!l) return [];
	const g = (name: string) => r.groups[name] ?? { latenciesMs: [], lost: 0, expected: 0 };
	const quiet = g('quiet');
	const loaded = g('loaded');
	const after = g('after');
	const upload = g('upload');
	const update = g('update');
	const reference = 'same run, before the load (quiet)';
	const windowS = (l.endAtMs - l.startedAtMs) / 1000;
	const lost = (x: { lost: number; expected: number }) => `lost ${x.lost} of ${x.expected}`;
	const p99 = percentile(loaded.latenciesMs, 99);
	const at = (action: string) => {
		const u = l.updateLogged.find((x) => x.action === action);
		return u ? `${((u.atMs - l.startedAtMs) / 1000).toFixed(1)} s` : 'not logged';
	};
	return [
		{
			suite: 'live',
			name: 'added load: broadcast latency p50, loaded window',
			strainlineMs: median(loaded.latenciesMs),
			referenceMs: median(quiet.latenciesMs),
			reference,
			note: `window ${windowS.toFixed(1)} s from ${LOAD_AT_S} s; loaded ${lost(loaded)}, quiet ${lost(quiet)}, after ${lost(after)} (p99 after ${percentile(after.latenciesMs, 99).toFixed(1)} ms)`
		},
		{
			suite: 'live',
			name: 'added load: broadcast latency p99, loaded window',
			strainlineMs: p99,
			referenceMs: percentile(quiet.latenciesMs, 99),
			reference,
			note: `goal < 150 ms with none lost: ${p99 < 150 && loaded.lost === 0 ? 'met' : 'NOT met'}; max ${percentile(loaded.latenciesMs, 100).toFixed(1)} ms; load ${load}`
		},
		{
			suite: 'live',
			name: `added load: update notice, flat nside-1024 map → ranked`,
			strainlineMs: l.updateLogged.find((x) => x.action === 'targets.ranked') ? l.updateLogged.find((x) => x.action === 'targets.ranked')!.atMs - l.startedAtMs : NaN,
			note:
				`acked ${l.publish.ackedAtMs ? `${((l.publish.ackedAtMs - l.startedAtMs) / 1000).toFixed(1)} s` : `no (${l.publish.error})`}; skymap.analysed ${at('skymap.analysed')}, ` +
				`targets.ranked ${at('targets.ranked')}${at('skymap.failed') !== 'not logged' ? `, skymap.failed ${at('skymap.failed')}` : ''}; its ${update.expected / CLIENTS} room messages ${lost(update)}`
		},
		{
			suite: 'live',
			name: `added load: ${l.uploadRows.toLocaleString('en')}-row pointing CSV, HTTP`,
			strainlineMs: l.upload.httpMs,
			note:
				`HTTP ${l.upload.status}${l.upload.error ? ` ${l.upload.error}` : ''}; its ${upload.expected / CLIENTS} messages from the POST: p50 ${median(upload.latenciesMs).toFixed(0)} ms, ` +
				`p99 ${percentile(upload.latenciesMs, 99).toFixed(0)} ms, ${lost(upload)}; claim/observation messages logged for requests that timed out: ${g('untraced').expected / CLIENTS}, ${lost(g('untraced'))}`
		}
	];
}

export async function run(): Promise<BenchResult[]> {
	ensureBuilt();
	const dir = mkdtempSync(join(tmpdir(), 'strainline-live-bench-'));
	const children = new Set<ChildProcess>();
	let watchdog: NodeJS.Timeout | undefined;
	let broker: FakeBroker | null = null;
	try {
		const dbFile = join(dir, 'bench.sqlite');
		const storageDir = join(dir, 'files');
		const t0 = nowMs();
		const world = await prepareAppWorld(ROOT, dbFile, storageDir, { catalogRows: CATALOG_ROWS });
		const worldS = (nowMs() - t0) / 1000;
		watchdog = setTimeout(() => {
			process.stderr.write(`live bench: watchdog after ${WATCHDOG_MS} ms, stopping every child\n`);
			for (const c of children) c.kill('SIGKILL');
		}, WATCHDOG_MS);
		watchdog.unref();
		let mapBytes = 0;
		if (ADDED_LOAD) {
			const t1 = nowMs();
			const map = flatMapFits({ raDeg: world.notice.antiSunRaDeg, decDeg: -20, widthDeg: 3, object: world.notice.sourceId, dateObs: world.notice.eventTime.slice(0, 23) });
			mapBytes = map.length;
			broker = await startBroker({ host: '127.0.0.1', vtpPort: 0, httpPort: 0, files: new Map([[FLAT_MAP_NAME, map]]), log: () => {} });
			process.stderr.write(`live bench: flat nside-1024 map (${(map.length / 1e6).toFixed(1)} MB) made in ${((nowMs() - t1) / 1000).toFixed(1)} s; broker on ${broker.httpBase}\n`);
		}
		const pairs = (RATE_PER_S * MAIN_S) / 2;
		if (pairs > world.targets.length * MAX_EPOCH) throw new Error(`${pairs} claims need more than ${world.targets.length} galaxies × ${MAX_EPOCH} epochs`);
		process.stderr.write(
			`live bench: event ${world.eventId} with ${world.targets.length} ranked galaxies of ${world.catalogGalaxies.toLocaleString('en')} ready in ${worldS.toFixed(1)} s; ` +
				`${CLIENTS} clients × ${RATE_PER_S} actions/s × ${MAIN_S} s on the app's routes…\n`
		);
		const room = `event:${world.eventId}`;
		let afterSeq = 0;
		const subscribed = broker ? new Promise<void>((resolve) => broker!.once('subscribe', () => resolve())) : null;
		const ours = await phase(
			'app',
			MAIN_S,
			{
				start: (port) => {
					// LIVE_BENCH_NODE_ARGS: extra node flags for the app, e.g. "--cpu-prof --cpu-prof-dir=/tmp/prof".
					const nodeArgs = (process.env.LIVE_BENCH_NODE_ARGS ?? '').split(' ').filter(Boolean);
					const app = spawn(process.execPath, [...nodeArgs, 'server.js'], {
						cwd: ROOT,
						stdio: ['ignore', 'pipe', 'inherit'],
						env: {
							...appProcessEnv(),
							PORT: String(port),
							HOST: '127.0.0.1',
							ORIGIN: `http://127.0.0.1:${port}`,
							DATABASE_URL: dbFile,
							STORAGE_DIR: storageDir,
							VTP_BROKER: broker ? `127.0.0.1:${broker.vtpPort}` : '',
							VTP_ARCHIVE_URL: broker ? broker.httpBase : '',
							SKYMAP_MAX_MB: String(SKYMAP_MAX_MB),
							FAKE_SMTP_PORT: '0',
							SMTP_URL: ''
						}
					});
					// The app's own account of the notice it is sent (fetch, analysis, ranking), beside the figures.
					let partial = '';
					app.stdout!.on('data', (chunk: Buffer) => {
						const lines = (partial + chunk.toString()).split('\n');
						partial = lines.pop() ?? '';
						for (const line of lines) if (/sky ?map|notice|rank|error|fail/i.test(line)) process.stderr.write(`live bench app: ${line.slice(0, 300)}\n`);
					});
					return app;
				},
				readyLine: 'Strainline listening on',
				room,
				tokens: world.listenerTokens,
				driver: (origin) => appDriver(origin, world),
				before: () => {
					afterSeq = latestSeq(dbFile);
					return (sent, load) => loggedExpected(dbFile, room, afterSeq, sent, load);
				},
				ready: async (origin) => {
					if (subscribed) await Promise.race([subscribed, new Promise((_, reject) => setTimeout(() => reject(new Error('the app did not subscribe to the fake broker within 30 s')), 30_000))]);
					await settled(`${origin}/api/v1/events/${world.eventId}`, world.listenerTokens[0]);
				},
				load: broker ? { atAction: LOAD_AT_S * RATE_PER_S, run: (origin) => addedLoad(origin, world, broker!, dbFile, room, afterSeq) } : undefined
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
		const l = ours.load;
		if (l && (l.upload.error || l.publish.error || !l.settled || l.updateLogged.some((u) => u.action === 'skymap.failed'))) {
			process.stderr.write(`live bench: ADDED LOAD INCOMPLETE: upload ${l.upload.error ?? 'ok'}; publish ${l.publish.error ?? 'ok'}; update ${l.settled ? 'settled' : 'not ranked in time'}; logged ${l.updateLogged.map((u) => u.action).join(', ')}\n`);
			process.exitCode = 1;
		}
		const reference = `bare socket.io (no auth, DB, route), ${REFERENCE_S} s`;
		// The driver's own messages (the upload's are timed from its POST and reported apart).
		const driverLatencies = ['all', 'quiet', 'loaded', 'after'].flatMap((g) => ours.groups[g]?.latenciesMs ?? []);
		const p99 = percentile(driverLatencies, 99);
		const run = `${CLIENTS} clients, ${RATE_PER_S} actions/s, ${MAIN_S} s`;
		const actions = `${claims.length} claims + ${observations.length} observations → ${ours.expected} messages`;
		return [
			{ suite: 'live', name: `${run}: broadcast latency p50`, strainlineMs: median(driverLatencies), referenceMs: median(bare.latenciesMs), reference, note: describe(ours) },
			{ suite: 'live', name: `${run}: broadcast latency p95`, strainlineMs: percentile(driverLatencies, 95), referenceMs: percentile(bare.latenciesMs, 95), reference, note: actions },
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
			},
			...addedLoadRows(ours, load)
		];
	} finally {
		clearTimeout(watchdog);
		await broker?.stop();
		agent.destroy();
		uploadAgent.destroy();
		for (const c of children) c.kill('SIGKILL');
		rmSync(dir, { recursive: true, force: true });
	}
}
