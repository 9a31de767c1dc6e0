/**
 * Live hub under load: 300 socket.io clients (websocket transport, API tokens of the demo
 * people, spread over 3 client processes) subscribed to one event room; a driver sends 20 actions
 * per second for 60 s, alternating claim-like and observation-like messages. Each action goes
 * over loopback HTTP to a hub process that authenticates the token and calls Strainline's
 * `record()` (event-log insert in SQLite, then the socket.io broadcast) — see
 * `live/strainline-hub.ts` for why the driver is a benchmark-only endpoint and not an app route.
 *
 * Per delivery: latency = client receive time − driver send time (carried in the payload; all
 * processes share the machine's clock). Reported: p50 and p99 over every delivery, and per client
 * whether every seq arrived exactly once and in order.
 *
 * Reference in the same run: the same clients and driver against a bare socket.io server (no
 * authentication, no database, no presence), for 15 s at the same rate.
 *
 * Bounded: connect timeout 30 s, a watchdog kills every child after 150 s, the database is a
 * temporary file. `LIVE_BENCH_SECONDS` shortens the main phase (for trying the bench out).
 */
import { fork, spawn, type ChildProcess } from 'node:child_process';
import http from 'node:http';
import { mkdtempSync, rmSync } from 'node:fs';
import { cpus, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { median, type BenchResult } from './run.ts';
import { freePort, nowMs, percentile, type ClientReport, type DriveRequest, type FromClients, type ToClients } from './live/protocol.ts';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));
const HERE = fileURLToPath(new URL('./live/', import.meta.url));
const CLIENTS = 300;
const CLIENT_PROCESSES = 3;
const RATE_PER_S = 20;
const MAIN_S = Number(process.env.LIVE_BENCH_SECONDS ?? 60);
const REFERENCE_S = Math.min(15, MAIN_S);
const CONNECT_TIMEOUT_MS = 30_000;
const DRAIN_MS = 3000;
const WATCHDOG_MS = 150_000;
const EVENT_ID = 'bench-live-event';
const ROOM = `event:${EVENT_ID}`;

interface PhaseResult {
	latenciesMs: number[];
	deliveries: number;
	sent: number;
	lost: number;
	duplicated: number;
	outOfOrder: number;
	unexpected: number;
	disconnects: number;
	presenceMessages: number;
	maxClientLagMs: number;
	connectMs: number;
	hubWorkMs: number[];
}

/** Temporary database with the demo people, the benchmark's event and one API token per person. */
async function prepareDatabase(file: string): Promise<string[]> {
	const { openDatabase } = await import('../../src/lib/server/db/index.ts');
	const { seedDemo } = await import('../../seeds/demo.ts');
	const { issueToken } = await import('../../src/lib/server/tokens.ts');
	const schema = await import('../../src/lib/server/db/schema.ts');
	const database = openDatabase(file);
	await seedDemo(database);
	database
		.insert(schema.gwEvent)
		.values({ id: EVENT_ID, sourceEventId: 'S-demo-bench-live', role: 'test', state: 'active', eventTime: new Date(), latestKind: 'preliminary', farHz: 1e-9 })
		.run();
	const people = database.select().from(schema.user).all();
	const tokens = people.map((p) => issueToken({ userId: null, label: 'bench' }, { name: 'live bench', userId: p.id }).secret);
	database.$client.close();
	return tokens;
}

function waitForLine(child: ChildProcess, line: string, ms: number): Promise<void> {
	return new Promise((resolve, reject) => {
		const timer = setTimeout(() => reject(new Error(`hub not ready after ${ms} ms`)), ms);
		let buffer = '';
		child.stdout!.on('data', (chunk: Buffer) => {
			buffer += chunk.toString();
			if (buffer.split('\n').includes(line)) {
				clearTimeout(timer);
				resolve();
			}
		});
		child.once('exit', (code) => reject(new Error(`hub exited (${code}) before it was ready`)));
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

const agent = new http.Agent({ keepAlive: true, maxSockets: 8 });

function post(origin: string, token: string, body: DriveRequest): Promise<number> {
	return new Promise((resolve, reject) => {
		const data = JSON.stringify(body);
		const req = http.request(`${origin}/bench/action`, { method: 'POST', agent, headers: { authorization: `Bearer ${token}`, 'content-type': 'application/json', 'content-length': Buffer.byteLength(data) } }, (res) => {
			let text = '';
			res.setEncoding('utf8');
			res.on('data', (c: string) => (text += c));
			res.on('end', () => (res.statusCode === 200 ? resolve((JSON.parse(text) as { seq: number }).seq) : reject(new Error(`driver got HTTP ${res.statusCode}`))));
		});
		req.setTimeout(10_000, () => req.destroy(new Error('driver request timed out')));
		req.on('error', reject);
		req.end(data);
	});
}

function getJson<T>(url: string): Promise<T> {
	return new Promise((resolve, reject) => {
		http
			.get(url, { agent }, (res) => {
				let text = '';
				res.setEncoding('utf8');
				res.on('data', (c: string) => (text += c));
				res.on('end', () => resolve(JSON.parse(text) as T));
			})
			.on('error', reject);
	});
}

/** What a claim or an observation message will roughly carry once those routes exist. */
function action(k: number): DriveRequest {
	const claim = k % 2 === 0;
	const field = `F${String(k % 97).padStart(3, '0')}`;
	return {
		room: ROOM,
		type: claim ? 'bench.claim' : 'bench.observation',
		payload: claim
			? { k, sentAtMs: 0, eventId: EVENT_ID, fieldId: field, telescope: 'Bench 1 m', raDeg: 12.5 + (k % 50) * 0.7, decDeg: -30 + (k % 40) * 0.9, until: new Date(Date.now() + 3.6e6).toISOString() }
			: { k, sentAtMs: 0, eventId: EVENT_ID, fieldId: field, band: 'r', exposureS: 120, limitingMag: 21.4, candidates: k % 5 }
	};
}

async function phase(kind: 'strainline' | 'bare', seconds: number, tokens: string[], dbFile: string, children: Set<ChildProcess>): Promise<PhaseResult> {
	const port = await freePort();
	const origin = `http://127.0.0.1:${port}`;
	const script = join(HERE, kind === 'strainline' ? 'strainline-hub.ts' : 'bare-hub.ts');
	const hub = spawn(process.execPath, ['--import', 'tsx', script], {
		cwd: ROOT,
		stdio: ['ignore', 'pipe', 'inherit'],
		env: { ...process.env, PORT: String(port), DATABASE_URL: dbFile }
	});
	children.add(hub);
	const clientProcs: ChildProcess[] = [];
	try {
		await waitForLine(hub, 'ready', 30_000);
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
			const rotated = tokens.map((_, k) => tokens[(k + p) % tokens.length]);
			c.send({ cmd: 'connect', origin, room: ROOM, tokens: rotated, count, connectTimeoutMs: CONNECT_TIMEOUT_MS } satisfies ToClients);
			return answer;
		});
		for (const m of await Promise.all(ready)) if (m.ev !== 'ready') throw new Error(`clients failed to connect: ${m.ev === 'failed' ? m.error : m.ev}`);
		const connectMs = nowMs() - t0;
		// Let the presence burst of 300 joins settle before timing.
		await new Promise((r) => setTimeout(r, 1000));

		const total = RATE_PER_S * seconds;
		const intervalMs = 1000 / RATE_PER_S;
		const seqs: Promise<number>[] = [];
		const start = nowMs() + 50;
		for (let k = 0; k < total; k++) {
			const due = start + k * intervalMs;
			const wait = due - nowMs();
			if (wait > 0) await new Promise((r) => setTimeout(r, wait));
			const body = action(k);
			body.payload.sentAtMs = nowMs();
			seqs.push(post(origin, tokens[k % tokens.length], body));
		}
		const sent = await Promise.all(seqs);
		await new Promise((r) => setTimeout(r, DRAIN_MS));

		const reports = await Promise.all(
			clientProcs.map(async (c) => {
				const answer = nextMessage(c, 20_000);
				c.send({ cmd: 'report', expectedSeqs: sent } satisfies ToClients);
				const m = await answer;
				if (m.ev !== 'report') throw new Error('client process did not report');
				return m.report;
			})
		);
		const stats = await getJson<{ recordMs: number[] }>(`${origin}/bench/stats`);
		const sum = (f: (r: ClientReport) => number) => reports.reduce((n, r) => n + f(r), 0);
		return {
			latenciesMs: reports.flatMap((r) => r.latenciesMs),
			deliveries: sum((r) => r.deliveries),
			sent: sent.length,
			lost: sum((r) => r.lost),
			duplicated: sum((r) => r.duplicated),
			outOfOrder: sum((r) => r.outOfOrder),
			unexpected: sum((r) => r.unexpected),
			disconnects: sum((r) => r.disconnects),
			presenceMessages: sum((r) => r.presenceMessages),
			maxClientLagMs: reports.reduce((m, r) => Math.max(m, r.maxLoopLagMs), 0),
			connectMs,
			hubWorkMs: stats.recordMs
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

function stop(child: ChildProcess, ms: number): Promise<void> {
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

function describe(r: PhaseResult): string {
	return (
		`${r.deliveries} deliveries of ${r.sent} messages; lost ${r.lost}, duplicated ${r.duplicated}, out of order ${r.outOfOrder}` +
		(r.unexpected ? `, unexpected ${r.unexpected}` : '') +
		`; disconnects ${r.disconnects}; max ${percentile(r.latenciesMs, 100).toFixed(1)} ms`
	);
}

export async function run(): Promise<BenchResult[]> {
	const dir = mkdtempSync(join(tmpdir(), 'strainline-live-bench-'));
	const children = new Set<ChildProcess>();
	const watchdog = setTimeout(() => {
		process.stderr.write(`live bench: watchdog after ${WATCHDOG_MS} ms, stopping every child\n`);
		for (const c of children) c.kill('SIGKILL');
	}, WATCHDOG_MS);
	watchdog.unref();
	try {
		const dbFile = join(dir, 'bench.sqlite');
		const tokens = await prepareDatabase(dbFile);
		process.stderr.write(`live bench: ${CLIENTS} clients × ${RATE_PER_S} actions/s × ${MAIN_S} s on Strainline's hub…\n`);
		const ours = await phase('strainline', MAIN_S, tokens, dbFile, children);
		process.stderr.write(`live bench: reference, bare socket.io, ${REFERENCE_S} s…\n`);
		const bare = await phase('bare', REFERENCE_S, tokens, dbFile, children);
		for (const [name, r] of [['strainline', ours], ['bare', bare]] as const) {
			process.stderr.write(`live bench ${name}: ${describe(r)}; connect ${r.connectMs.toFixed(0)} ms; presence messages ${r.presenceMessages}; max client loop lag ${r.maxClientLagMs.toFixed(1)} ms; hub work p50 ${median(r.hubWorkMs).toFixed(2)} ms p99 ${percentile(r.hubWorkMs, 99).toFixed(2)} ms\n`);
			if (r.lost || r.duplicated || r.outOfOrder || r.unexpected || r.deliveries !== r.sent * CLIENTS) {
				process.stderr.write(`live bench ${name}: DELIVERY CHECK FAILED\n`);
				process.exitCode = 1;
			}
		}
		const reference = `bare socket.io (no auth, DB, presence), ${REFERENCE_S} s`;
		const p99 = percentile(ours.latenciesMs, 99);
		return [
			{
				suite: 'live',
				name: `${CLIENTS} clients, ${RATE_PER_S} actions/s, ${MAIN_S} s: broadcast latency p50`,
				strainlineMs: median(ours.latenciesMs),
				referenceMs: median(bare.latenciesMs),
				reference,
				note: describe(ours)
			},
			{
				suite: 'live',
				name: `${CLIENTS} clients, ${RATE_PER_S} actions/s, ${MAIN_S} s: broadcast latency p99`,
				strainlineMs: p99,
				referenceMs: percentile(bare.latenciesMs, 99),
				reference,
				note: `goal < 150 ms: ${p99 < 150 ? 'met' : 'NOT met'}; reference: ${describe(bare)}`
			},
			{
				suite: 'live',
				name: 'hub work per action (record(): event-log insert + broadcast), p50',
				strainlineMs: median(ours.hubWorkMs),
				referenceMs: median(bare.hubWorkMs),
				reference: 'bare: broadcast only',
				note: `p99 ${percentile(ours.hubWorkMs, 99).toFixed(2)} ms; ${cpus().length} cores`
			}
		];
	} finally {
		clearTimeout(watchdog);
		agent.destroy();
		for (const c of children) c.kill('SIGKILL');
		rmSync(dir, { recursive: true, force: true });
	}
}
