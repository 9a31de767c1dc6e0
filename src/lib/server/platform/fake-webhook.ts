import { createServer, type Server } from 'node:http';
import { FAKE_WEBHOOK_BODY_MAX_BYTES } from '../../limits';
import { listenOnLoopback } from './loopback';

/** A message the local fake webhook receiver took (or refused, when told to fail). */
export interface CaughtWebhook {
	id: number;
	receivedAt: string;
	path: string;
	/** The status it answered with. */
	status: number;
	/** The body as JSON when it parsed, else null (`raw` then holds the text). */
	json: unknown;
	raw: string;
}

interface Receiver {
	server: Server | null;
	port: number | null;
	caught: CaughtWebhook[];
	nextId: number;
	/** Answer this many of the next requests with `failStatus`. */
	failRemaining: number;
	failStatus: number;
}

const SLOT = Symbol.for('strainline.fake-webhook');
const KEEP = 500;

function receiver(): Receiver {
	const g = globalThis as unknown as Record<symbol, Receiver | undefined>;
	g[SLOT] ??= { server: null, port: null, caught: [], nextId: 1, failRemaining: 0, failStatus: 500 };
	return g[SLOT]!;
}

/** Answer the next `times` requests with `status` (500 unless told), then take messages again. */
export function failNextWebhooks(times: number, status = 500): void {
	const r = receiver();
	r.failRemaining = Math.max(0, Math.floor(times));
	r.failStatus = status;
}

/**
 * Start the development webhook receiver on 127.0.0.1 (once per process): it takes any POST,
 * keeps the newest KEEP messages for the development page, and answers 200 — or fails on request.
 * `POST /_fail?times=N[&status=S]` on it does what `failNextWebhooks` does, for scripts.
 */
export async function startFakeWebhook(port: number): Promise<number> {
	const r = receiver();
	if (r.server && r.port !== null) return r.port;
	const server = createServer((req, res) => {
		const url = new URL(req.url ?? '/', 'http://127.0.0.1');
		if (req.method === 'POST' && url.pathname === '/_fail') {
			failNextWebhooks(Number(url.searchParams.get('times') ?? 1), Number(url.searchParams.get('status') ?? 500));
			req.resume();
			res.writeHead(204).end();
			return;
		}
		if (req.method !== 'POST') {
			res.writeHead(405, { allow: 'POST' }).end('POST only\n');
			return;
		}
		const chunks: Buffer[] = [];
		let size = 0;
		let tooBig = false;
		req.on('data', (c: Buffer) => {
			size += c.length;
			if (size > FAKE_WEBHOOK_BODY_MAX_BYTES) tooBig = true;
			else chunks.push(c);
		});
		req.on('end', () => {
			const raw = Buffer.concat(chunks).toString('utf8');
			let json: unknown = null;
			try {
				json = JSON.parse(raw);
			} catch {
				json = null;
			}
			let status = 200;
			if (tooBig) status = 413;
			else if (r.failRemaining > 0) {
				r.failRemaining--;
				status = r.failStatus;
			} else if (json === null) status = 400;
			r.caught.unshift({ id: r.nextId++, receivedAt: new Date().toISOString(), path: url.pathname, status, json, raw: tooBig ? '' : raw });
			r.caught.length = Math.min(r.caught.length, KEEP);
			res.writeHead(status, { 'content-type': 'text/plain' }).end(status === 200 ? 'ok\n' : `refused (${status})\n`);
		});
	});
	const bound = await listenOnLoopback(server, port, () => server.address());
	r.server = server;
	r.port = bound;
	return bound;
}

export function fakeWebhookPort(): number | null {
	return receiver().port;
}

/** What the receiver took, newest first. */
export function caughtWebhooks(): readonly CaughtWebhook[] {
	return receiver().caught;
}

/** Forget what was caught (tests). */
export function clearCaughtWebhooks(): void {
	const r = receiver();
	r.caught = [];
	r.failRemaining = 0;
}

export async function stopFakeWebhook(): Promise<void> {
	const r = receiver();
	if (!r.server) return;
	await new Promise<void>((resolve) => r.server!.close(() => resolve()));
	r.server = null;
	r.port = null;
}
