/**
 * Shared between the live benchmark's orchestrator (tests/bench/live.bench.ts), its hub
 * processes and its client processes. Times are milliseconds on the machine's wall clock with
 * sub-millisecond resolution (`performance.timeOrigin + performance.now()`), which every process
 * on one machine shares.
 */
import net from 'node:net';

export const nowMs = (): number => performance.timeOrigin + performance.now();

/** One action the driver sends; the hub broadcasts `payload` unchanged apart from its own fields. */
export interface DriveRequest {
	room: string;
	type: string;
	payload: Record<string, unknown> & { k: number; sentAtMs: number };
}

/** Parent → client process. */
export type ToClients =
	| { cmd: 'connect'; origin: string; room: string; tokens: string[]; count: number; connectTimeoutMs: number }
	| { cmd: 'report'; expectedSeqs: number[] }
	| { cmd: 'close' };

export interface ClientReport {
	clients: number;
	deliveries: number;
	/** Every delivery's latency (receive − send), ms, rounded to 0.01 ms. */
	latenciesMs: number[];
	lost: number;
	duplicated: number;
	outOfOrder: number;
	/** Messages for seqs the driver never sent (should be 0). */
	unexpected: number;
	disconnects: number;
	presenceMessages: number;
	/** Largest event-loop delay seen in the client process, ms: a sign the client side is the bottleneck. */
	maxLoopLagMs: number;
}

/** Client process → parent. */
export type FromClients = { ev: 'ready'; connectMs: number } | { ev: 'failed'; error: string } | { ev: 'report'; report: ClientReport };

export function percentile(values: ArrayLike<number>, p: number): number {
	const s = Float64Array.from(values as ArrayLike<number>).sort();
	if (s.length === 0) return NaN;
	const k = Math.min(s.length - 1, Math.max(0, Math.ceil((p / 100) * s.length) - 1));
	return s[k];
}

export function freePort(): Promise<number> {
	return new Promise((resolve, reject) => {
		const srv = net.createServer();
		srv.once('error', reject);
		srv.listen(0, '127.0.0.1', () => {
			const port = (srv.address() as net.AddressInfo).port;
			srv.close(() => resolve(port));
		});
	});
}

/** Read a small JSON request body (the driver's actions are a few hundred bytes). */
export function readBody(req: import('node:http').IncomingMessage): Promise<string> {
	return new Promise((resolve, reject) => {
		let body = '';
		req.setEncoding('utf8');
		req.on('data', (c: string) => {
			body += c;
			if (body.length > 64_000) req.destroy(new Error('body too large'));
		});
		req.on('end', () => resolve(body));
		req.on('error', reject);
	});
}
