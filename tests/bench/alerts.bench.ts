/**
 * Alert latency: the fake broker sends a notice over VTP → the real app server process (built,
 * `node server.js`) stores it, acks, fetches the sky map from the broker's HTTP server, analyses
 * it → a socket.io board client has received both `skymap.analysed` and `notice.processed`.
 * 50 notices, one after another, each a new event with its own IVORN; p50 and p95 reported.
 *
 * References measured in the same run:
 *  - the bare work, in this process: parse the same XML, analyse the same sky map and build its
 *    display raster (what the pipeline cannot avoid);
 *  - a raw loopback VTP round trip (broker send → ack from a listener whose commit does nothing).
 *
 * The app is built with `vite build` when `build/handler.js` is missing or older than the alert
 * code. The database, stored files and ports are temporary.
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, statSync, existsSync } from 'node:fs';
import net from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { io, type Socket } from 'socket.io-client';
import { startBroker } from '../../fake-alert-broker/broker.ts';
import { parseVoevent } from '../../src/lib/alerts/voevent.ts';
import { analyseSkymap, skyRaster } from '../../src/lib/sky/index.ts';
import { VtpListener } from '../../src/lib/server/alerts/listener.ts';
import { median, type BenchResult } from './run.ts';
import { appProcessEnv } from '../../src/lib/server/platform/app-process.ts';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));
const FIXTURES = join(ROOT, 'tests/fixtures/notices/');
const NOTICES = 50;
const WARMUP = 3;

function percentile(values: number[], p: number): number {
	const s = [...values].sort((a, b) => a - b);
	const k = Math.min(s.length - 1, Math.max(0, Math.ceil((p / 100) * s.length) - 1));
	return s[k];
}

function freePort(): Promise<number> {
	return new Promise((resolve, reject) => {
		const srv = net.createServer();
		srv.once('error', reject);
		srv.listen(0, '127.0.0.1', () => {
			const port = (srv.address() as net.AddressInfo).port;
			srv.close(() => resolve(port));
		});
	});
}

async function waitFor(check: () => boolean, ms: number, what: string): Promise<void> {
	const t0 = Date.now();
	while (!check()) {
		if (Date.now() - t0 > ms) throw new Error(`timed out after ${ms} ms waiting for ${what}`);
		await new Promise((r) => setTimeout(r, 10));
	}
}

function newestSource(): number {
	const files = [
		'src/lib/server/alerts/ingest.ts',
		'src/lib/server/alerts/service.ts',
		'src/lib/server/alerts/skymap-fetch.ts',
		'src/lib/server/platform/storage.ts',
		'src/lib/server/alerts/triage-policy.ts',
		'src/hooks.server.ts'
	];
	return Math.max(...files.map((f) => statSync(join(ROOT, f)).mtimeMs));
}

function ensureBuilt(): void {
	const handler = join(ROOT, 'build/handler.js');
	if (existsSync(handler) && statSync(handler).mtimeMs > newestSource()) return;
	process.stderr.write('alerts bench: building the app (vite build)…\n');
	const r = spawnSync('npx', ['vite', 'build', '--logLevel', 'warn'], { cwd: ROOT, stdio: ['ignore', 'inherit', 'inherit'] });
	if (r.status !== 0) throw new Error('vite build failed');
}

function noticeXml(base: string, httpBase: string, n: number): { xml: string; ivorn: string } {
	const id = `SXB${String(n).padStart(3, '0')}`;
	const ivorn = `ivo://strainline.example/fake-broker#${id}-1-preliminary`;
	const xml = base
		.replaceAll('http://127.0.0.1:8098/skymaps/SX30041207-1.multiorder.fits.gz', `${httpBase}/skymaps/${id}-1.multiorder.fits.gz`)
		.replace('ivo://strainline.example/fake-broker#SX30041207-1-preliminary', ivorn)
		.replace('value="SX30041207"', `value="${id}"`);
	return { xml, ivorn };
}

/** Seed a temporary database with the demo people and issue a token for the duty scientist. */
async function prepareDatabase(file: string): Promise<string> {
	const { openDatabase } = await import('../../src/lib/server/platform/db/index.ts');
	const { seedDemo } = await import('../../seeds/demo.ts');
	const { issueToken } = await import('../../src/lib/server/people/tokens.ts');
	const schema = await import('../../src/lib/server/platform/db/schema.ts');
	const { eq } = await import('drizzle-orm');
	const database = openDatabase(file);
	await seedDemo(database);
	const duty = database.select().from(schema.user).where(eq(schema.user.email, 'duty@strainline.demo')).get();
	if (!duty) throw new Error('demo duty scientist missing');
	return issueToken({ userId: null, label: 'bench' }, { name: 'alerts bench', userId: duty.id }).secret;
}

export async function run(): Promise<BenchResult[]> {
	ensureBuilt();
	const dir = mkdtempSync(join(tmpdir(), 'strainline-alerts-bench-'));
	const baseXml = readFileSync(join(FIXTURES, 'bns-preliminary.xml'), 'utf8');
	const mapBytes = readFileSync(join(FIXTURES, 'skymap-demo.multiorder.fits.gz'));
	const broker = await startBroker({ ackTimeoutMs: 10_000 });
	let app: ChildProcess | null = null;
	let socket: Socket | null = null;
	try {
		for (let n = 0; n < NOTICES + WARMUP; n++) broker.addFile(`SXB${String(n).padStart(3, '0')}-1.multiorder.fits.gz`, mapBytes);
		const token = await prepareDatabase(join(dir, 'bench.sqlite'));
		const port = await freePort();
		const origin = `http://127.0.0.1:${port}`;
		app = spawn('node', ['server.js'], {
			cwd: ROOT,
			stdio: ['ignore', 'ignore', 'inherit'],
			env: {
				...appProcessEnv(),
				PORT: String(port),
				HOST: '127.0.0.1',
				ORIGIN: origin,
				DATABASE_URL: join(dir, 'bench.sqlite'),
				STORAGE_DIR: join(dir, 'files'),
				VTP_BROKER: `127.0.0.1:${broker.vtpPort}`,
				VTP_ARCHIVE_URL: '',
				SKYMAP_HOSTS: '127.0.0.1',
				FAKE_SMTP_PORT: '0',
				SMTP_URL: ''
			}
		});
		const exited = new Promise<never>((_, reject) => app!.once('exit', (code) => reject(new Error(`app exited (${code})`))));
		exited.catch(() => undefined);
		await waitFor(() => broker.subscriberCount() === 1, 30_000, 'the app to subscribe to the broker');

		const messages: { type: string; payload: Record<string, unknown>; at: number }[] = [];
		socket = io(`${origin}/live`, { path: '/socket.io', transports: ['websocket'], auth: { token }, reconnection: false });
		await new Promise<void>((resolve, reject) => {
			socket!.once('connect', () => resolve());
			socket!.once('connect_error', (e) => reject(e));
		});
		socket.on('live', (m: { type: string; payload: Record<string, unknown> }) => messages.push({ ...m, at: performance.now() }));

		const e2e: number[] = [];
		for (let n = 0; n < NOTICES + WARMUP; n++) {
			const { xml, ivorn } = noticeXml(baseXml, broker.httpBase, n);
			const t0 = performance.now();
			const ack = broker.publish(xml);
			await Promise.race([waitFor(() => messages.some((m) => m.type === 'notice.processed' && m.payload.ivorn === ivorn), 20_000, `notice ${n}`), exited]);
			const processed = messages.find((m) => m.type === 'notice.processed' && m.payload.ivorn === ivorn)!;
			const analysed = messages.find((m) => m.type === 'skymap.analysed' && m.payload.noticeId === processed.payload.noticeId);
			if (!analysed || analysed.at > processed.at) throw new Error(`notice ${n}: no skymap.analysed before notice.processed`);
			if ((await ack).acked !== 1) throw new Error(`notice ${n} was not acked`);
			if (n >= WARMUP) e2e.push(processed.at - t0);
		}

		// Reference 1: the bare work in this process, same XML and map.
		const bare: number[] = [];
		for (let k = 0; k < NOTICES + WARMUP; k++) {
			const { xml } = noticeXml(baseXml, broker.httpBase, k);
			const t0 = performance.now();
			parseVoevent(xml);
			skyRaster(analyseSkymap(new Uint8Array(mapBytes)).map, { width: 360, height: 180 });
			if (k >= WARMUP) bare.push(performance.now() - t0);
		}

		// Reference 2: raw loopback VTP round trip (another broker, a listener that stores nothing).
		const rawBroker = await startBroker({ ackTimeoutMs: 5000 });
		const listener = new VtpListener({ host: '127.0.0.1', port: rawBroker.vtpPort, commit: async () => undefined });
		listener.start();
		const rtt: number[] = [];
		try {
			await waitFor(() => rawBroker.subscriberCount() === 1, 5000, 'raw listener');
			for (let k = 0; k < NOTICES + WARMUP; k++) {
				const { xml } = noticeXml(baseXml, rawBroker.httpBase, 1000 + k);
				const t0 = performance.now();
				const r = await rawBroker.publish(xml);
				if (r.acked !== 1) throw new Error('raw round trip not acked');
				if (k >= WARMUP) rtt.push(performance.now() - t0);
			}
		} finally {
			await listener.stop();
			await rawBroker.stop();
		}

		const note = `n=${NOTICES}; VTP round trip p50 ${median(rtt).toFixed(2)} ms; map 8,619 rows (83.7 kB gz)`;
		return [
			{
				suite: 'alerts',
				name: 'broker send → analysed event on a board client, p50',
				strainlineMs: median(e2e),
				referenceMs: median(bare),
				reference: 'bare parse + analyse + raster, in-process',
				note
			},
			{
				suite: 'alerts',
				name: 'broker send → analysed event on a board client, p95',
				strainlineMs: percentile(e2e, 95),
				referenceMs: percentile(bare, 95),
				reference: 'bare parse + analyse + raster, in-process',
				note: `max ${Math.max(...e2e).toFixed(1)} ms`
			},
			{
				suite: 'alerts',
				name: 'raw loopback VTP round trip (send → ack), p50',
				strainlineMs: median(rtt),
				note: `p95 ${percentile(rtt, 95).toFixed(2)} ms`
			}
		];
	} finally {
		socket?.close();
		if (app && app.exitCode === null) {
			const gone = new Promise((r) => app!.once('exit', r));
			app.kill('SIGTERM');
			await gone;
		}
		await broker.stop();
		rmSync(dir, { recursive: true, force: true });
	}
}
