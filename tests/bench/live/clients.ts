/**
 * A client process of the live benchmark (forked with IPC): opens `count` socket.io clients
 * (websocket transport, one connection each, API-token authenticated), subscribes each to the
 * event room and notes, per client, every `live` message of that room: its seq, its key (type +
 * the claim / observation id its payload names, see `keyOf`) and its receive time. At the end the
 * parent sends the expected messages (key, logged seq, send time of the causing request) and the
 * process reports latencies and what was lost, duplicated, reordered or unexpected.
 * Raw sockets, not the browser's LiveConnection: that one drops duplicates by seq, which would
 * hide a hub that sends one twice.
 */
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { writeFileSync } from 'node:fs';
import { io, type Socket } from 'socket.io-client';
import { keyOf, nowMs, type ClientReport, type ExpectedMessage, type FromClients, type ToClients } from './protocol.ts';

interface Client {
	socket: Socket;
	seqs: number[];
	/** Index into `keys` (−1: untraceable message), parallel to `seqs`. */
	keyIds: number[];
	ats: number[];
	disconnects: number;
}

const clients: Client[] = [];
// Keys are interned: 300 clients × ~2,000 messages would otherwise hold ~600k copies of the same strings.
const keyIndex = new Map<string, number>();
const keys: string[] = [];
let presenceMessages = 0;
const loop = monitorEventLoopDelay({ resolution: 5 });

const send = (m: FromClients) => process.send!(m);

function intern(key: string | null): number {
	if (key === null) return -1;
	let id = keyIndex.get(key);
	if (id === undefined) {
		id = keys.length;
		keys.push(key);
		keyIndex.set(key, id);
	}
	return id;
}

async function open(origin: string, room: string, token: string, timeoutMs: number): Promise<Client> {
	const socket = io(`${origin}/live`, { path: '/socket.io', transports: ['websocket'], auth: { token }, reconnection: false, forceNew: true, timeout: timeoutMs });
	const client: Client = { socket, seqs: [], keyIds: [], ats: [], disconnects: 0 };
	socket.on('live', (m: { seq: number; room: string; type: string; payload: Record<string, unknown> }) => {
		if (m.room !== room) return;
		client.ats.push(nowMs());
		client.seqs.push(m.seq);
		client.keyIds.push(intern(keyOf(m.type, m.payload, m.seq)));
	});
	socket.on('presence', () => presenceMessages++);
	socket.on('disconnect', () => client.disconnects++);
	await new Promise<void>((resolve, reject) => {
		socket.once('connect', () => resolve());
		socket.once('connect_error', (e) => reject(e));
	});
	const answer = (await socket.timeout(timeoutMs).emitWithAck('subscribe', { rooms: [room], since: null })) as { rooms: string[] };
	if (!answer.rooms.includes(room)) throw new Error(`not allowed into ${room}`);
	return client;
}

function report(expected: ExpectedMessage[]): ClientReport {
	const byKey = new Map(expected.map((e) => [e.key, e]));
	const latencies: number[] = [];
	let lost = 0;
	let duplicated = 0;
	let outOfOrder = 0;
	let unexpected = 0;
	let seqMismatch = 0;
	let deliveries = 0;
	const groups: Record<string, { latenciesMs: number[]; lost: number; expected: number }> = {};
	const groupOf = (e: ExpectedMessage) => (groups[e.group ?? 'all'] ??= { latenciesMs: [], lost: 0, expected: 0 });
	for (const e of expected) groupOf(e).expected += clients.length;
	for (const c of clients) {
		deliveries += c.seqs.length;
		const seen = new Set<string>();
		for (let k = 0; k < c.seqs.length; k++) {
			if (k > 0 && c.seqs[k] < c.seqs[k - 1]) outOfOrder++;
			const key = c.keyIds[k] < 0 ? null : keys[c.keyIds[k]];
			const e = key === null ? undefined : byKey.get(key);
			if (!e) {
				unexpected++;
				continue;
			}
			if (seen.has(e.key)) {
				duplicated++;
				continue;
			}
			seen.add(e.key);
			if (c.seqs[k] !== e.seq) seqMismatch++;
			if (e.sentAtMs !== null) {
				const ms = Math.round((c.ats[k] - e.sentAtMs) * 100) / 100;
				latencies.push(ms);
				groupOf(e).latenciesMs.push(ms);
			}
		}
		lost += expected.length - seen.size;
		for (const e of expected) if (!seen.has(e.key)) groupOf(e).lost++;
	}
	// LIVE_BENCH_TRACE_DIR: per message, when its request left and its slowest delivery to this
	// process's clients (a diagnostic: where in the run the tail comes from).
	if (process.env.LIVE_BENCH_TRACE_DIR) {
		const slowest = new Map<string, number>();
		for (const c of clients)
			for (let k = 0; k < c.seqs.length; k++) {
				const e = c.keyIds[k] < 0 ? undefined : byKey.get(keys[c.keyIds[k]]);
				if (e?.sentAtMs != null) slowest.set(e.key, Math.max(slowest.get(e.key) ?? 0, c.ats[k] - e.sentAtMs));
			}
		const rows = expected.filter((e) => slowest.has(e.key)).map((e) => `${e.sentAtMs},${slowest.get(e.key)!.toFixed(1)},${e.group ?? 'all'},${e.key}`);
		writeFileSync(`${process.env.LIVE_BENCH_TRACE_DIR}/trace-${process.pid}.csv`, rows.join('\n') + '\n');
	}
	return {
		clients: clients.length,
		deliveries,
		latenciesMs: latencies,
		lost,
		groups,
		duplicated,
		outOfOrder,
		unexpected,
		seqMismatch,
		disconnects: clients.reduce((n, c) => n + c.disconnects, 0),
		presenceMessages,
		maxLoopLagMs: loop.max / 1e6
	};
}

process.on('message', async (m: ToClients) => {
	if (m.cmd === 'connect') {
		const t0 = nowMs();
		try {
			// A few at a time: 100 simultaneous handshakes from one process is a thundering herd.
			for (let k = 0; k < m.count; k += 10) {
				const batch = Array.from({ length: Math.min(10, m.count - k) }, (_, j) => open(m.origin, m.room, m.tokens[(k + j) % m.tokens.length], m.connectTimeoutMs));
				clients.push(...(await Promise.all(batch)));
			}
			loop.enable();
			send({ ev: 'ready', connectMs: nowMs() - t0 });
		} catch (e) {
			send({ ev: 'failed', error: e instanceof Error ? e.message : String(e) });
		}
	} else if (m.cmd === 'report') {
		loop.disable();
		send({ ev: 'report', report: report(m.expected) });
	} else if (m.cmd === 'close') {
		for (const c of clients) c.socket.close();
		setTimeout(() => process.exit(0), 100);
	}
});
// If the parent dies, do not linger.
process.on('disconnect', () => process.exit(0));
