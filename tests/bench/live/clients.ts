/**
 * A client process of the live benchmark (forked with IPC): opens `count` socket.io clients
 * (websocket transport, one connection each, API-token authenticated), subscribes each to the
 * event room and notes, per client, every `live` message's seq and its latency (receive time −
 * the driver's send time carried in the payload). Raw sockets, not the browser's LiveConnection:
 * that one drops duplicates by seq, which would hide a hub that sends one twice.
 */
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { io, type Socket } from 'socket.io-client';
import { nowMs, type ClientReport, type FromClients, type ToClients } from './protocol.ts';

interface Client {
	socket: Socket;
	seqs: number[];
	disconnects: number;
}

const clients: Client[] = [];
const latencies: number[] = [];
let presenceMessages = 0;
const loop = monitorEventLoopDelay({ resolution: 5 });

const send = (m: FromClients) => process.send!(m);

async function open(origin: string, room: string, token: string, timeoutMs: number): Promise<Client> {
	const socket = io(`${origin}/live`, { path: '/socket.io', transports: ['websocket'], auth: { token }, reconnection: false, forceNew: true, timeout: timeoutMs });
	const client: Client = { socket, seqs: [], disconnects: 0 };
	socket.on('live', (m: { seq: number; room: string; payload: { sentAtMs?: number } }) => {
		if (m.room !== room) return;
		const at = nowMs();
		client.seqs.push(m.seq);
		if (typeof m.payload?.sentAtMs === 'number') latencies.push(Math.round((at - m.payload.sentAtMs) * 100) / 100);
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

function report(expectedSeqs: number[]): ClientReport {
	const expected = new Set(expectedSeqs);
	let lost = 0;
	let duplicated = 0;
	let outOfOrder = 0;
	let unexpected = 0;
	let deliveries = 0;
	for (const c of clients) {
		deliveries += c.seqs.length;
		const seen = new Set<number>();
		for (let k = 0; k < c.seqs.length; k++) {
			const s = c.seqs[k];
			if (seen.has(s)) duplicated++;
			seen.add(s);
			if (!expected.has(s)) unexpected++;
			if (k > 0 && s < c.seqs[k - 1]) outOfOrder++;
		}
		for (const s of expected) if (!seen.has(s)) lost++;
	}
	return {
		clients: clients.length,
		deliveries,
		latenciesMs: latencies,
		lost,
		duplicated,
		outOfOrder,
		unexpected,
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
		send({ ev: 'report', report: report(m.expectedSeqs) });
	} else if (m.cmd === 'close') {
		for (const c of clients) c.socket.close();
		setTimeout(() => process.exit(0), 100);
	}
});
// If the parent dies, do not linger.
process.on('disconnect', () => process.exit(0));
