/**
 * The fake alert broker: a VTP server (TCP) that sends notices to every subscriber and waits for
 * their acks, keep-alives (iamalive) on a timer, and an HTTP server for the sky maps it makes
 * and for an archive of past notices (`GET /notices?since=ISO`) so subscribers can back-fill.
 *
 * Notices are VOEvent XML or JSON notices (`format`). VTP carries XML only, so a JSON notice is
 * published to the archive alone, where subscribers read it (on (re)connection and on a timer).
 *
 * Importable: tests start it on ephemeral loopback ports and drive it with publish().
 */
import { EventEmitter } from 'node:events';
import http from 'node:http';
import net from 'node:net';
import { sniffIvorn } from '../src/lib/alerts/voevent.ts';
import { sniffJsonNoticeIvorn, type NoticeFormat } from '../src/lib/alerts/notice-json.ts';
import { buildIamalive, encodeFrame, FrameDecoder, messageKind, parseTransport } from '../src/lib/alerts/vtp.ts';
import { BROKER_IVORN } from './notices.ts';
import { listScenarios, loadScenario, renderScenario } from './scenarios.ts';

/** One archived notice: its format and text (`xml` too for a VOEvent, the layout before JSON notices). */
export interface ArchiveItem {
	ivorn: string | null;
	publishedAt: string;
	format: NoticeFormat;
	text: string;
	xml?: string;
}

export interface BrokerOptions {
	host?: string;
	/** 0 = an ephemeral port. */
	vtpPort?: number;
	httpPort?: number;
	iamaliveIntervalMs?: number;
	ackTimeoutMs?: number;
	/** Start with these archived notices (e.g. carried over a restart). */
	archive?: ArchiveItem[];
	/** Sky-map files to serve from the start (name → bytes). */
	files?: Map<string, Buffer>;
	log?: (message: string) => void;
}

export interface PublishResult {
	ivorn: string | null;
	delivered: number;
	acked: number;
	naked: number;
	timedOut: number;
}

export interface PlayOptions {
	speed?: number;
	seed?: number;
	loop?: boolean;
	/** How many times to loop at most (default: forever while loop is set). */
	cycles?: number;
	epoch?: Date;
	signal?: AbortSignal;
	/** Seconds between two scenarios when playing several. */
	gapSeconds?: number;
	/** Publish VOEvents over VTP (default), or JSON notices, with their maps inside, to the archive only. */
	format?: NoticeFormat;
}

interface Pending {
	ivorn: string;
	settle: (outcome: 'ack' | 'nak' | 'timeout') => void;
}

interface Subscriber {
	id: number;
	socket: net.Socket;
	pending: Pending[];
	peer: string;
}

export interface BrokerEvents {
	subscribe: [{ id: number; peer: string }];
	unsubscribe: [{ id: number; peer: string }];
	ack: [{ id: number; ivorn: string | null }];
	nak: [{ id: number; ivorn: string | null; reason: string | null }];
	iamalive: [{ id: number; response: string | null }];
	published: [PublishResult];
}

export class FakeBroker extends EventEmitter<BrokerEvents> {
	vtpPort = 0;
	httpPort = 0;
	readonly host: string;
	private readonly opts: BrokerOptions;
	private readonly vtp: net.Server;
	private readonly web: http.Server;
	private readonly subscribers = new Map<number, Subscriber>();
	private readonly files: Map<string, Buffer>;
	private readonly archiveItems: ArchiveItem[];
	private iamaliveTimer: NodeJS.Timeout | null = null;
	private nextId = 1;
	private stopped = false;

	constructor(opts: BrokerOptions = {}) {
		super();
		this.opts = opts;
		this.host = opts.host ?? '127.0.0.1';
		this.files = opts.files ?? new Map();
		this.archiveItems = [...(opts.archive ?? [])];
		this.vtp = net.createServer((s) => this.onSubscriber(s));
		this.web = http.createServer((req, res) => this.onHttp(req, res));
	}

	get httpBase(): string {
		const h = this.host.includes(':') ? `[${this.host}]` : this.host;
		return `http://${h}:${this.httpPort}`;
	}

	async listen(): Promise<this> {
		const listen = (server: net.Server | http.Server, port: number) =>
			new Promise<number>((resolve, reject) => {
				server.once('error', reject);
				server.listen(port, this.host, () => {
					server.off('error', reject);
					resolve((server.address() as net.AddressInfo).port);
				});
			});
		this.vtpPort = await listen(this.vtp, this.opts.vtpPort ?? 0);
		try {
			this.httpPort = await listen(this.web, this.opts.httpPort ?? 0);
		} catch (e) {
			this.vtp.close();
			throw e;
		}
		const every = this.opts.iamaliveIntervalMs ?? 60_000;
		this.iamaliveTimer = setInterval(() => this.sendIamalive(), every);
		this.iamaliveTimer.unref();
		this.log(`VTP on ${this.host}:${this.vtpPort}, HTTP on ${this.httpBase}`);
		return this;
	}

	private log(message: string): void {
		this.opts.log?.(message);
	}

	subscriberCount(): number {
		return this.subscribers.size;
	}

	archive(): ArchiveItem[] {
		return [...this.archiveItems];
	}

	addFile(name: string, bytes: Buffer): void {
		if (!/^[A-Za-z0-9._-]+$/.test(name)) throw new Error(`bad file name "${name}"`);
		this.files.set(name, bytes);
	}

	/** Send iamalive to every subscriber now. */
	sendIamalive(): void {
		for (const s of this.subscribers.values()) this.write(s, buildIamalive(BROKER_IVORN));
	}

	/** Close every subscriber connection (the server keeps listening). */
	dropSubscribers(): void {
		for (const s of this.subscribers.values()) s.socket.destroy();
	}

	/**
	 * Archive a notice, send it to every subscriber and wait until each has acked, naked or timed
	 * out. The XML is sent as given (a malformed notice too).
	 */
	async publish(xml: string): Promise<PublishResult> {
		const ivorn = sniffIvorn(xml);
		this.archiveItems.push({ ivorn, publishedAt: new Date().toISOString(), format: 'voevent', text: xml, xml });
		const timeoutMs = this.opts.ackTimeoutMs ?? 5000;
		const waits = [...this.subscribers.values()].map(
			(s) =>
				new Promise<'ack' | 'nak' | 'timeout'>((resolve) => {
					const timer = setTimeout(() => done('timeout'), timeoutMs);
					const p: Pending = { ivorn: ivorn ?? '', settle: (o) => done(o) };
					const done = (o: 'ack' | 'nak' | 'timeout') => {
						clearTimeout(timer);
						const i = s.pending.indexOf(p);
						if (i >= 0) s.pending.splice(i, 1);
						resolve(o);
					};
					s.pending.push(p);
					this.write(s, xml);
				})
		);
		const outcomes = await Promise.all(waits);
		const result: PublishResult = {
			ivorn,
			delivered: outcomes.length,
			acked: outcomes.filter((o) => o === 'ack').length,
			naked: outcomes.filter((o) => o === 'nak').length,
			timedOut: outcomes.filter((o) => o === 'timeout').length
		};
		this.log(`published ${ivorn ?? '(no ivorn)'}: ${result.acked}/${result.delivered} acked`);
		this.emit('published', result);
		return result;
	}

	/**
	 * Archive a JSON notice (as given, a malformed one too). It is not sent over VTP, an XML
	 * transport: subscribers read it from the archive. Resolves at once, delivered to nobody.
	 */
	async publishJson(text: string): Promise<PublishResult> {
		const ivorn = sniffJsonNoticeIvorn(text);
		this.archiveItems.push({ ivorn, publishedAt: new Date().toISOString(), format: 'json', text });
		const result: PublishResult = { ivorn, delivered: 0, acked: 0, naked: 0, timedOut: 0 };
		this.log(`archived JSON notice ${ivorn ?? '(unreadable)'} (${text.length} bytes)`);
		this.emit('published', result);
		return result;
	}

	/** Play one scenario, or all of them one after another. Resolves when done (or aborted). */
	async play(name: string, o: PlayOptions = {}): Promise<PublishResult[]> {
		const names = name === 'all' ? playOrder(listScenarios()) : [name];
		const scenarios = names.map((n) => loadScenario(n));
		const speed = o.speed ?? 1;
		const results: PublishResult[] = [];
		for (let cycle = 0; ; cycle++) {
			for (const [k, sc] of scenarios.entries()) {
				if (k > 0) await sleep(((o.gapSeconds ?? 30) * 1000) / speed, o.signal);
				const epoch = cycle === 0 && k === 0 && o.epoch ? o.epoch : new Date();
				const steps = renderScenario(sc, { epoch, httpBase: this.httpBase, seed: o.seed, speed, cycle });
				for (const step of steps) {
					await sleep((step.delaySeconds * 1000) / speed, o.signal);
					if (o.signal?.aborted || this.stopped) return results;
					if (o.format === 'json') {
						results.push(await this.publishJson(step.json()));
						continue;
					}
					if (step.map) this.addFile(step.map.name, step.map.build());
					results.push(await this.publish(step.xml));
				}
			}
			if (!o.loop || (o.cycles !== undefined && cycle + 1 >= o.cycles)) return results;
		}
	}

	async stop(): Promise<void> {
		this.stopped = true;
		if (this.iamaliveTimer) clearInterval(this.iamaliveTimer);
		for (const s of this.subscribers.values()) {
			for (const p of [...s.pending]) p.settle('timeout');
			s.socket.destroy();
		}
		await Promise.all([
			new Promise<void>((r) => this.vtp.close(() => r())),
			new Promise<void>((r) => {
				this.web.closeAllConnections?.();
				this.web.close(() => r());
			})
		]);
	}

	private write(s: Subscriber, xml: string): void {
		if (!s.socket.destroyed && s.socket.writable) s.socket.write(encodeFrame(xml));
	}

	private onSubscriber(socket: net.Socket): void {
		const s: Subscriber = { id: this.nextId++, socket, pending: [], peer: `${socket.remoteAddress}:${socket.remotePort}` };
		this.subscribers.set(s.id, s);
		socket.setNoDelay(true);
		this.log(`subscriber ${s.id} from ${s.peer}`);
		this.emit('subscribe', { id: s.id, peer: s.peer });
		const decoder = new FrameDecoder({ maxFrameBytes: 64 * 1024 });
		socket.on('data', (chunk) => {
			let frames: Buffer[];
			try {
				frames = decoder.push(chunk);
			} catch (e) {
				this.log(`subscriber ${s.id}: ${(e as Error).message}`);
				socket.destroy();
				return;
			}
			for (const f of frames) this.onSubscriberMessage(s, f.toString('utf8'));
		});
		socket.on('error', () => undefined);
		socket.on('close', () => {
			this.subscribers.delete(s.id);
			for (const p of [...s.pending]) p.settle('timeout');
			this.emit('unsubscribe', { id: s.id, peer: s.peer });
		});
		// Greet at once, so a subscriber knows the link works.
		this.write(s, buildIamalive(BROKER_IVORN));
	}

	private onSubscriberMessage(s: Subscriber, xml: string): void {
		if (messageKind(xml) !== 'transport') {
			this.log(`subscriber ${s.id} sent something that is not a Transport message`);
			return;
		}
		let msg;
		try {
			msg = parseTransport(xml);
		} catch (e) {
			this.log(`subscriber ${s.id}: ${(e as Error).message}`);
			return;
		}
		if (msg.role === 'iamalive') {
			this.emit('iamalive', { id: s.id, response: msg.response });
			return;
		}
		if (msg.role === 'ack' || msg.role === 'nak') {
			const key = msg.origin ?? '';
			const p = s.pending.find((x) => x.ivorn === key);
			if (msg.role === 'ack') this.emit('ack', { id: s.id, ivorn: msg.origin });
			else this.emit('nak', { id: s.id, ivorn: msg.origin, reason: msg.result });
			p?.settle(msg.role);
		}
	}

	private onHttp(req: http.IncomingMessage, res: http.ServerResponse): void {
		const url = new URL(req.url ?? '/', 'http://broker.invalid');
		const json = (status: number, body: unknown) => {
			res.writeHead(status, { 'content-type': 'application/json' });
			res.end(JSON.stringify(body));
		};
		if (req.method !== 'GET' && req.method !== 'HEAD') return json(405, { error: { code: 'method', message: 'GET only' } });
		if (url.pathname === '/notices') {
			const since = url.searchParams.get('since');
			let t = -Infinity;
			if (since !== null) {
				t = Date.parse(since);
				if (!Number.isFinite(t)) return json(400, { error: { code: 'since', message: 'since must be an ISO-8601 time' } });
			}
			// ≥ rather than >: a back-filling client dedupes by IVORN, a gap would be worse.
			return json(200, { notices: this.archiveItems.filter((a) => Date.parse(a.publishedAt) >= t) });
		}
		if (url.pathname === '/health') return json(200, { subscribers: this.subscribers.size, published: this.archiveItems.length });
		const m = /^\/skymaps\/([A-Za-z0-9._-]+)$/.exec(url.pathname);
		if (m && this.files.has(m[1])) {
			const body = this.files.get(m[1])!;
			res.writeHead(200, {
				'content-type': m[1].endsWith('.gz') ? 'application/gzip' : 'application/fits',
				'content-length': body.length
			});
			res.end(req.method === 'HEAD' ? undefined : body);
			return;
		}
		json(404, { error: { code: 'not_found', message: 'no such file' } });
	}
}

/** The order of `--scenario all`: the story the demo tells, then the odd cases. */
function playOrder(names: string[]): string[] {
	const preferred = ['bns', 'retraction', 'bbh', 'test', 'malformed'];
	return [...preferred.filter((n) => names.includes(n)), ...names.filter((n) => !preferred.includes(n))];
}

function sleep(ms: number, signal?: AbortSignal): Promise<void> {
	if (ms <= 0 || signal?.aborted) return Promise.resolve();
	return new Promise((resolve) => {
		const t = setTimeout(done, ms);
		function done() {
			clearTimeout(t);
			signal?.removeEventListener('abort', done);
			resolve();
		}
		signal?.addEventListener('abort', done, { once: true });
	});
}

/** Start a broker; resolves once both servers listen. */
export async function startBroker(opts: BrokerOptions = {}): Promise<FakeBroker> {
	return new FakeBroker(opts).listen();
}
