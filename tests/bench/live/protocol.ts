/**
 * Shared between the live benchmark's orchestrator (tests/bench/live.bench.ts), its reference hub
 * and its client processes. Times are milliseconds on the machine's wall clock with
 * sub-millisecond resolution (`performance.timeOrigin + performance.now()`), which every process
 * on one machine shares.
 */
import net from 'node:net';

export const nowMs = (): number => performance.timeOrigin + performance.now();

/** One action the driver sends to the reference hub; it broadcasts `payload` unchanged. */
export interface DriveRequest {
	room: string;
	type: string;
	payload: Record<string, unknown> & { k: number };
}

/**
 * What identifies a live message independently of its seq: its type and the id its payload
 * names — the claim for `claim.*`, the observation for `observation.*` (an upload, one message for
 * many pointings: its telescope and count), the driver's action
 * number for the reference hub's `bench.*`. The same ids come back in the HTTP responses, which
 * is how a delivery is traced to the request that caused it. Any other message (what the server
 * logs while it processes a notice: `skymap.analysed`, `targets.ranked`, …) is named by its type
 * and seq, which the event log also holds. Null: a message the bench cannot trace.
 */
export function keyOf(type: string, payload: Record<string, unknown> | null | undefined, seq?: number): string | null {
	const p = payload ?? {};
	// An upload is one message for all its pointings: named by the telescope and how many.
	if (type === 'observation.uploaded') return typeof p.telescopeId === 'string' && typeof p.count === 'number' ? `${type}|${p.telescopeId}|${p.count}` : null;
	const id = type.startsWith('observation.') ? p.observationId : type.startsWith('claim.') ? p.claimId : type.startsWith('bench.') ? p.k : undefined;
	if (typeof id === 'string' || typeof id === 'number') return `${type}|${id}`;
	if (seq !== undefined && !/^(observation|claim|bench)\./.test(type)) return `${type}|#${seq}`;
	return null;
}

/** A message every client should receive exactly once: its key, the seq the server logged, and the send time of its request. */
export interface ExpectedMessage {
	key: string;
	seq: number;
	/** Null: the server logged it but no request of the driver names it (counted, not timed). */
	sentAtMs: number | null;
	/** Which part of the run it belongs to (latencies and losses are also reported per group). */
	group?: string;
}

/** Per group of expected messages: traced latencies and losses, summed over a process's clients. */
export interface GroupReport {
	latenciesMs: number[];
	lost: number;
	expected: number;
}

/** Parent → client process. */
export type ToClients =
	| { cmd: 'connect'; origin: string; room: string; tokens: string[]; count: number; connectTimeoutMs: number }
	| { cmd: 'report'; expected: ExpectedMessage[] }
	| { cmd: 'close' };

export interface ClientReport {
	clients: number;
	deliveries: number;
	/** Every traced delivery's latency (receive − the request's send time), ms, rounded to 0.01 ms. */
	latenciesMs: number[];
	/** Expected messages a client never received, summed over clients. */
	lost: number;
	/** The same by the group the parent gave each expected message (`ExpectedMessage.group`). */
	groups: Record<string, GroupReport>;
	/** Second and later receipts of one expected message by one client. */
	duplicated: number;
	/** Deliveries whose seq is lower than the previous one on the same client. */
	outOfOrder: number;
	/** Deliveries in the event room that match no expected message (untraceable, or never logged). */
	unexpected: number;
	/** Deliveries whose key was expected but carried a different seq than the one logged. */
	seqMismatch: number;
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
