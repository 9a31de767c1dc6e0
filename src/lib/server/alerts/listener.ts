/**
 * VTP subscriber: connects to a VOEvent broker over TCP, answers its keep-alives, hands every
 * VOEvent to `commit`, and acknowledges it only once `commit` has resolved (nak when it throws).
 *
 * DB-agnostic on purpose: the caller's `commit` stores the raw XML (the notice inbox, unique by
 * IVORN) and the caller processes it afterwards. Storing before acking means a crash between the
 * two costs a redelivery, never a lost notice; a redelivery is harmless because the inbox is
 * unique by IVORN.
 */
import { EventEmitter } from 'node:events';
import net from 'node:net';
import { sniffIvorn } from '../../alerts/voevent.ts';
import type { NoticeFormat } from '../../alerts/notice-json.ts';
import {
	buildAck,
	buildIamalive,
	buildNak,
	DEFAULT_MAX_FRAME_BYTES,
	encodeFrame,
	FrameDecoder,
	messageKind,
	parseTransport
} from '../../alerts/vtp.ts';

export type ListenerState = 'connecting' | 'connected' | 'down';
export type LogLevel = 'info' | 'warn' | 'error';

export interface BackoffOptions {
	/** First reconnect delay, ms. */
	initialMs?: number;
	/** Largest reconnect delay, ms. */
	maxMs?: number;
	/** Growth per failed attempt. */
	factor?: number;
	/** Fraction of the delay removed at random (0 = none, 1 = "full jitter"). */
	jitter?: number;
}

export interface ListenerOptions {
	host: string;
	port: number;
	/** Store the raw notice durably; resolve only once it is safe to acknowledge. */
	commit: (rawXml: string) => Promise<void>;
	log?: (level: LogLevel, message: string) => void;
	/** Our IVORN, sent as Response in acks and keep-alive answers. */
	identity?: string;
	backoff?: BackoffOptions;
	/** No bytes from the broker for this long → drop the connection and reconnect. */
	silenceTimeoutMs?: number;
	connectTimeoutMs?: number;
	maxFrameBytes?: number;
	/** Source of randomness for jitter (tests pass a fixed one). */
	random?: () => number;
}

export interface ListenerStatus {
	state: ListenerState;
	running: boolean;
	host: string;
	port: number;
	connectedAt: string | null;
	lastMessageAt: string | null;
	lastError: string | null;
	/** Connections opened after the first. */
	reconnects: number;
	received: number;
	acked: number;
	naked: number;
}

export interface ListenerEvents {
	status: [ListenerStatus];
	/** A notice that was committed and acknowledged. */
	committed: [{ ivorn: string | null; rawXml: string }];
}

/** Default silence limit: brokers commonly send iamalive every 60 s (common practice). */
export const DEFAULT_SILENCE_TIMEOUT_MS = 150_000;
/** Port commonly used by VTP brokers (common practice). */
export const DEFAULT_VTP_PORT = 8099;

/**
 * Parse `host:port`, `[v6addr]:port`, or a bare host (port {@link DEFAULT_VTP_PORT}), as given in
 * the `VTP_BROKER` environment variable. Throws with a one-line reason.
 */
export function parseBrokerAddress(value: string): { host: string; port: number } {
	const s = value.trim();
	if (!s) throw new Error('VTP broker address is empty (expected host:port)');
	let host: string;
	let portText: string | undefined;
	const v6 = /^\[([0-9a-fA-F:.]+)\](?::(\d+))?$/.exec(s);
	if (v6) {
		host = v6[1];
		portText = v6[2];
	} else {
		if (/\s|\/|@/.test(s)) throw new Error(`VTP broker address "${s}" is not host:port`);
		const parts = s.split(':');
		if (parts.length > 2) throw new Error(`VTP broker address "${s}": put an IPv6 address in brackets, [addr]:port`);
		host = parts[0];
		portText = parts[1];
	}
	if (!host) throw new Error(`VTP broker address "${s}" has no host`);
	if (portText === undefined) return { host, port: DEFAULT_VTP_PORT };
	if (!/^\d{1,5}$/.test(portText)) throw new Error(`VTP broker port "${portText}" is not a number`);
	const port = Number(portText);
	if (port < 1 || port > 65535) throw new Error(`VTP broker port ${port} is outside 1–65535`);
	return { host, port };
}

/**
 * Delay before reconnect attempt `attempt` (0-based): exponential growth capped at `maxMs`, then
 * a random fraction up to `jitter` removed so that many subscribers do not reconnect in step
 * ("exponential backoff and jitter", common practice).
 */
export function backoffDelayMs(attempt: number, opts: BackoffOptions = {}, random: () => number = Math.random): number {
	const initial = opts.initialMs ?? 500;
	const max = opts.maxMs ?? 30_000;
	const factor = opts.factor ?? 2;
	const jitter = Math.min(1, Math.max(0, opts.jitter ?? 0.3));
	const base = Math.min(max, initial * Math.pow(factor, Math.max(0, attempt)));
	return Math.round(base * (1 - jitter * random()));
}

export class VtpListener extends EventEmitter<ListenerEvents> {
	private readonly opts: ListenerOptions;
	private readonly identity: string;
	private socket: net.Socket | null = null;
	private reconnectTimer: NodeJS.Timeout | null = null;
	private silenceTimer: NodeJS.Timeout | null = null;
	private attempt = 0;
	private connections = 0;
	private running = false;
	private queue: Promise<void> = Promise.resolve();
	private st: Omit<ListenerStatus, 'running' | 'host' | 'port'> = {
		state: 'down',
		connectedAt: null,
		lastMessageAt: null,
		lastError: null,
		reconnects: 0,
		received: 0,
		acked: 0,
		naked: 0
	};

	constructor(opts: ListenerOptions) {
		super();
		if (!Number.isInteger(opts.port) || opts.port < 1 || opts.port > 65535) {
			throw new Error(`VTP broker port ${opts.port} is outside 1–65535`);
		}
		this.opts = opts;
		this.identity = opts.identity ?? 'ivo://strainline.invalid/listener';
	}

	status(): ListenerStatus {
		return { ...this.st, running: this.running, host: this.opts.host, port: this.opts.port };
	}

	start(): void {
		if (this.running) return;
		this.running = true;
		this.attempt = 0;
		this.connect();
	}

	/** Close the connection and stop reconnecting; resolves once any commit under way settles. */
	async stop(): Promise<void> {
		this.running = false;
		if (this.reconnectTimer) clearTimeout(this.reconnectTimer);
		this.reconnectTimer = null;
		this.clearSilence();
		const s = this.socket;
		this.socket = null;
		if (s && !s.destroyed) {
			await new Promise<void>((resolve) => {
				s.once('close', () => resolve());
				s.destroy();
			});
		}
		await this.queue.catch(() => undefined);
		this.setState('down');
	}

	private log(level: LogLevel, message: string): void {
		this.opts.log?.(level, `vtp ${this.opts.host}:${this.opts.port}: ${message}`);
	}

	private setState(state: ListenerState, patch: Partial<typeof this.st> = {}): void {
		const changed = state !== this.st.state || Object.keys(patch).length > 0;
		this.st = { ...this.st, ...patch, state };
		if (changed) this.emit('status', this.status());
	}

	private connect(): void {
		if (!this.running) return;
		this.setState('connecting');
		const socket = net.connect({ host: this.opts.host, port: this.opts.port });
		this.socket = socket;
		socket.setNoDelay(true);
		socket.setKeepAlive(true, 30_000);
		const decoder = new FrameDecoder({ maxFrameBytes: this.opts.maxFrameBytes ?? DEFAULT_MAX_FRAME_BYTES });
		let sawData = false;
		let closeReason: string | null = null;
		const connectTimer = setTimeout(() => socket.destroy(new Error('connect timed out')), this.opts.connectTimeoutMs ?? 10_000);

		socket.once('connect', () => {
			clearTimeout(connectTimer);
			if (this.connections++ > 0) this.st.reconnects++;
			this.log('info', 'connected');
			// lastError is kept across connections: it tells an operator why the last one ended.
			this.setState('connected', { connectedAt: new Date().toISOString() });
			this.armSilence(socket);
		});
		socket.on('data', (chunk: Buffer) => {
			if (!sawData) {
				sawData = true;
				// Only a broker that talks to us counts as a success for the backoff.
				this.attempt = 0;
			}
			this.armSilence(socket);
			let frames: Buffer[];
			try {
				frames = decoder.push(chunk);
			} catch (e) {
				this.log('error', `${(e as Error).message}; dropping the connection`);
				socket.destroy(e as Error);
				return;
			}
			for (const frame of frames) {
				this.queue = this.queue.then(() => this.handleFrame(socket, frame)).catch((e) => {
					this.log('error', `handling a message failed: ${(e as Error).message}`);
				});
			}
		});
		socket.on('error', (e) => {
			closeReason = e.message;
			this.st.lastError = e.message;
		});
		socket.once('close', () => {
			clearTimeout(connectTimer);
			if (this.socket === socket) this.socket = null;
			this.clearSilence();
			if (!this.running) return;
			if (!closeReason) this.st.lastError = 'connection closed by the broker';
			this.log('warn', `connection closed${closeReason ? ` (${closeReason})` : ''}`);
			this.setState('down');
			this.scheduleReconnect();
		});
	}

	private scheduleReconnect(): void {
		if (!this.running || this.reconnectTimer) return;
		const delay = backoffDelayMs(this.attempt++, this.opts.backoff, this.opts.random);
		this.log('info', `reconnecting in ${delay} ms`);
		this.reconnectTimer = setTimeout(() => {
			this.reconnectTimer = null;
			this.connect();
		}, delay);
	}

	private armSilence(socket: net.Socket): void {
		this.clearSilence();
		const ms = this.opts.silenceTimeoutMs ?? DEFAULT_SILENCE_TIMEOUT_MS;
		this.silenceTimer = setTimeout(() => {
			this.log('warn', `no bytes from the broker for ${ms} ms; reconnecting`);
			socket.destroy(new Error(`broker silent for ${ms} ms`));
		}, ms);
	}

	private clearSilence(): void {
		if (this.silenceTimer) clearTimeout(this.silenceTimer);
		this.silenceTimer = null;
	}

	private send(socket: net.Socket, xml: string): void {
		if (!socket.destroyed && socket.writable) socket.write(encodeFrame(xml));
	}

	private async handleFrame(socket: net.Socket, frame: Buffer): Promise<void> {
		const xml = frame.toString('utf8');
		if (xml.trim() === '') return;
		this.setState(this.st.state, { lastMessageAt: new Date().toISOString() });
		if (messageKind(xml) === 'transport') {
			let msg;
			try {
				msg = parseTransport(xml);
			} catch (e) {
				this.log('warn', `ignoring a bad Transport message: ${(e as Error).message}`);
				return;
			}
			if (msg.role === 'iamalive') this.send(socket, buildIamalive(msg.origin ?? '', this.identity));
			return;
		}
		// Anything else is offered to commit, malformed or not: the inbox keeps the raw text, and
		// the parse error is recorded there rather than lost here.
		this.st.received++;
		const ivorn = sniffIvorn(xml);
		try {
			await this.opts.commit(xml);
		} catch (e) {
			this.st.naked++;
			this.log('error', `commit of ${ivorn ?? 'a notice without ivorn'} failed: ${(e as Error).message}`);
			this.send(socket, buildNak(ivorn ?? '', this.identity, (e as Error).message.split('\n')[0]));
			this.setState(this.st.state, {});
			return;
		}
		this.st.acked++;
		this.send(socket, buildAck(ivorn ?? '', this.identity));
		this.emit('committed', { ivorn, rawXml: xml });
		this.setState(this.st.state, {});
	}
}

/** Convenience: construct and start. */
export function startListener(opts: ListenerOptions): VtpListener {
	const l = new VtpListener(opts);
	l.start();
	return l;
}

/**
 * One notice in a broker's archive: `{ ivorn, publishedAt, format, text }`, where `format` is
 * "voevent" or "json" and `text` the notice as published. An entry with only `xml` (the layout
 * before JSON notices) is a VOEvent.
 */
export interface ArchiveItem {
	ivorn: string | null;
	publishedAt: string;
	format?: NoticeFormat;
	text?: string;
	xml?: string;
}

/**
 * Back-fill from a broker's notice archive (`GET {baseUrl}/notices?since=ISO` →
 * `{ notices: ArchiveItem[] }`, oldest first), committing each notice in order with its format.
 * Used after a restart to fetch what was published while we were away, and (JSON notices, which
 * VTP does not carry) on a timer; the caller's commit dedupes by IVORN. Returns how many were
 * committed.
 */
export async function backfillFromArchive(opts: {
	baseUrl: string;
	since: string | Date;
	commit: (raw: string, format: NoticeFormat) => Promise<void>;
	timeoutMs?: number;
	maxBytes?: number;
	fetch?: typeof fetch;
}): Promise<number> {
	const since = typeof opts.since === 'string' ? opts.since : opts.since.toISOString();
	const url = new URL('notices', opts.baseUrl.endsWith('/') ? opts.baseUrl : opts.baseUrl + '/');
	url.searchParams.set('since', since);
	const res = await (opts.fetch ?? fetch)(url, { signal: AbortSignal.timeout(opts.timeoutMs ?? 10_000) });
	if (!res.ok) throw new Error(`archive ${url.pathname} answered ${res.status}`);
	const body = await res.text();
	const max = opts.maxBytes ?? 32 * 1024 * 1024;
	if (body.length > max) throw new Error(`archive answer larger than ${max} bytes`);
	const data = JSON.parse(body) as { notices?: ArchiveItem[] };
	if (!Array.isArray(data.notices)) throw new Error('archive answer has no notices array');
	let n = 0;
	for (const item of data.notices) {
		const text = typeof item?.text === 'string' ? item.text : item?.xml;
		if (typeof text !== 'string') continue;
		await opts.commit(text, item.format === 'json' ? 'json' : 'voevent');
		n++;
	}
	return n;
}
