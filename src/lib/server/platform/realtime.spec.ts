import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { io as connect, type Socket } from 'socket.io-client';
import { createTestDatabase } from './testing/database';
import { attachSocketIO, realtimeSlot } from './socket-host.js';
import { installRealtime, latestSeq, record as recordAction, SYSTEM, watchers, PRESENCE_INTERVAL_MS, type Actor, type PresenceMessage, type Room } from './realtime';
import { liveAccess } from '../people/live-access';
import * as auth from '../people/auth';
import { createUser } from '../people/people';
import { issueToken } from '../people/tokens';
import { LiveConnection, type LiveMessage as ClientMessage } from '../../live.svelte';

// The hub carries every action alike: these tests record made-up ones (no reaction elsewhere
// hears them), so they see `record` and its messages without the typed action map.
type LiveMessage = { seq: number; room: Room; type: string; actor: string; payload: Record<string, unknown>; at: string };
const record = recordAction as unknown as (actor: Actor, action: string, room: Room, payload: Record<string, unknown>) => LiveMessage;

let server: http.Server;
let url: string;
let sessionToken: string;
let liveUserId: string;
const sockets: Socket[] = [];

function open(opts: Parameters<typeof connect>[1] = {}): Socket {
	const s = connect(`${url}/live`, { transports: ['websocket'], reconnection: false, forceNew: true, ...opts });
	sockets.push(s);
	return s;
}

function outcome(s: Socket): Promise<'connected' | string> {
	return new Promise((resolve) => {
		s.once('connect', () => resolve('connected'));
		s.once('connect_error', (e) => resolve(e.message));
	});
}

beforeAll(async () => {
	createTestDatabase();
	const userId = await createUser({ email: 'live@example.test', name: 'Live', password: 'long-enough-pw', roles: ['viewer'] });
	liveUserId = userId;
	sessionToken = auth.generateSessionToken();
	auth.createSession(sessionToken, userId);
	server = http.createServer((_req, res) => res.end('ok'));
	attachSocketIO(server);
	installRealtime(liveAccess);
	await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
	url = `http://127.0.0.1:${(server.address() as AddressInfo).port}`;
});

afterAll(async () => {
	for (const s of sockets) s.close();
	await new Promise<void>((r) => realtimeSlot().io!.close(() => r()));
});

describe('live hub', () => {
	it('delivers a published message to a signed-in client, with its sequence number', async () => {
		const s = open({ extraHeaders: { cookie: `${auth.SESSION_COOKIE}=${sessionToken}` } });
		expect(await outcome(s)).toBe('connected');
		await s.emitWithAck('subscribe', { rooms: ['board'], since: null });
		const got = new Promise<LiveMessage>((r) => s.once('live', r));
		const sent = record(SYSTEM, 'test.ping', 'board', { hello: 'world' });
		const m = await got;
		expect(m).toEqual(sent);
		expect(m.seq).toBeGreaterThan(0);
		expect(m.payload).toEqual({ hello: 'world' });
	});

	it('hands a reconnecting client what it missed since its last sequence number', async () => {
		const first = record(SYSTEM, 'test.one', 'board', { n: 1 });
		record(SYSTEM, 'test.two', 'board', { n: 2 });
		record(SYSTEM, 'test.elsewhere', 'event:E1', { n: 3 });
		const s = open({ extraHeaders: { cookie: `${auth.SESSION_COOKIE}=${sessionToken}` } });
		expect(await outcome(s)).toBe('connected');
		const answer = await s.emitWithAck('subscribe', { rooms: ['board'], since: first.seq - 1 });
		expect(answer.missed.map((m: LiveMessage) => m.type)).toEqual(['test.one', 'test.two']);
	});

	it('refuses a handshake without a valid session', async () => {
		expect(await outcome(open())).toMatch(/unauthorised/);
		expect(await outcome(open({ extraHeaders: { cookie: `${auth.SESSION_COOKIE}=forged` } }))).toMatch(/unauthorised/);
	});

	it('accepts a person’s bearer token and refuses a revoked one', async () => {
		const owner = auth.loadSessionUser((await createUser({ email: 't@example.test', name: 'T', password: 'long-enough-pw', roles: ['viewer'] })))!;
		const { id, secret } = issueToken(SYSTEM, { name: 'script', userId: owner.id });
		expect(await outcome(open({ auth: { token: secret } }))).toBe('connected');
		const { revokeToken } = await import('../people/tokens');
		revokeToken(SYSTEM, id);
		expect(await outcome(open({ auth: { token: secret } }))).toMatch(/unauthorised/);
	});

	it('refuses the default namespace', async () => {
		const s = connect(url, { transports: ['websocket'], reconnection: false, forceNew: true });
		sockets.push(s);
		expect(await outcome(s)).toMatch(/live namespace/);
	});
});

async function sessionFor(email: string, name: string): Promise<{ userId: string; cookie: string }> {
	const userId = await createUser({ email, name, password: 'long-enough-pw', roles: ['viewer'] });
	const token = auth.generateSessionToken();
	auth.createSession(token, userId);
	return { userId, cookie: `${auth.SESSION_COOKIE}=${token}` };
}

async function connected(cookie: string): Promise<Socket> {
	const s = open({ extraHeaders: { cookie } });
	expect(await outcome(s)).toBe('connected');
	return s;
}

function until<T>(s: Socket, event: string, check: (m: T) => boolean, ms = 3000): Promise<T> {
	return new Promise((resolve, reject) => {
		const timer = setTimeout(() => reject(new Error(`no matching ${event} within ${ms} ms`)), ms);
		const on = (m: T) => {
			if (!check(m)) return;
			clearTimeout(timer);
			s.off(event, on);
			resolve(m);
		};
		s.on(event, on);
	});
}

const summary = (list: { name: string; count: number }[]) => list.map((w) => `${w.name}×${w.count}`);
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

describe('presence on an event room', () => {
	it('lists each person once with their number of connections, and tells the room when it changes', async () => {
		const ada = await sessionFor('ada@example.test', 'Ada Quill');
		const bo = await sessionFor('bo@example.test', 'Bo Lindqvist');
		const room = 'event:PRES1';
		const a1 = await connected(ada.cookie);
		const first = await a1.emitWithAck('subscribe', { rooms: [room], since: null });
		expect(summary(first.presence[room])).toEqual(['Ada Quill×1']);

		const a2 = await connected(ada.cookie);
		await a2.emitWithAck('subscribe', { rooms: [room], since: null });
		const b = await connected(bo.cookie);
		const seenByAda = until<PresenceMessage>(a1, 'presence', (p) => p.room === room && p.watchers.length === 2);
		const answer = await b.emitWithAck('subscribe', { rooms: [room], since: null });
		expect(summary(answer.presence[room])).toEqual(['Ada Quill×2', 'Bo Lindqvist×1']);
		expect(summary((await seenByAda).watchers)).toEqual(['Ada Quill×2', 'Bo Lindqvist×1']);
		expect(watchers(room).map((w) => w.userId)).toEqual([ada.userId, bo.userId]);

		// Leaving explicitly and going away both count; the rest of the room hears of it.
		const afterLeave = until<PresenceMessage>(b, 'presence', (p) => p.room === room && summary(p.watchers).join() === 'Ada Quill×1,Bo Lindqvist×1');
		a2.emit('unsubscribe', { rooms: [room] });
		await afterLeave;
		const afterClose = until<PresenceMessage>(b, 'presence', (p) => p.room === room && summary(p.watchers).join() === 'Bo Lindqvist×1');
		a1.close();
		await afterClose;
		expect(summary(watchers(room))).toEqual(['Bo Lindqvist×1']);
		b.close();
		await expect.poll(() => watchers(room).length).toBe(0);
	});

	it('is not an action: nothing is written to the event log, and the board has no presence', async () => {
		const cy = await sessionFor('cy@example.test', 'Cy Ortega');
		const before = latestSeq();
		const s = await connected(cy.cookie);
		const answer = await s.emitWithAck('subscribe', { rooms: ['board', 'event:PRES2'], since: null });
		expect(Object.keys(answer.presence)).toEqual(['event:PRES2']);
		s.emit('unsubscribe', { rooms: ['event:PRES2'] });
		await expect.poll(() => watchers('event:PRES2').length).toBe(0);
		expect(latestSeq()).toBe(before);
		expect(watchers('board')).toEqual([]);
	});

	it('sends at most one presence message per interval to a room, and the last one is complete', async () => {
		const room = 'event:PRES3';
		const observer = await connected(`${auth.SESSION_COOKIE}=${sessionToken}`);
		await observer.emitWithAck('subscribe', { rooms: [room], since: null });
		await sleep(PRESENCE_INTERVAL_MS + 50);
		const arrivals: { atMs: number; watchers: number }[] = [];
		observer.on('presence', (p: PresenceMessage) => {
			if (p.room === room) arrivals.push({ atMs: performance.now(), watchers: p.watchers.length });
		});
		const people = await Promise.all([1, 2, 3, 4, 5, 6, 7, 8].map((k) => sessionFor(`burst${k}@example.test`, `Burst ${k}`)));
		const sockets = await Promise.all(people.map((p) => connected(p.cookie)));
		// Join one after another, as a room filling up after an alert would.
		for (const s of sockets) {
			await s.emitWithAck('subscribe', { rooms: [room], since: null });
			await sleep(20);
		}
		await expect.poll(() => arrivals.at(-1)?.watchers, { timeout: 3000 }).toBe(9);
		await sleep(PRESENCE_INTERVAL_MS + 50);
		// 8 changes over ~160 ms + trailing edge: at most 2 messages, each at least one interval apart.
		expect(arrivals.length).toBeGreaterThanOrEqual(1);
		expect(arrivals.length).toBeLessThanOrEqual(2);
		for (let k = 1; k < arrivals.length; k++) expect(arrivals[k].atMs - arrivals[k - 1].atMs).toBeGreaterThanOrEqual(PRESENCE_INTERVAL_MS - 20);
		expect(arrivals.at(-1)!.watchers).toBe(9);
		for (const s of sockets) s.close();
		observer.close();
	});
});

describe('catching up after a lost connection', () => {
	it('hands a client that reconnects with its last seq exactly what it missed, once, in order', async () => {
		const cookie = `${auth.SESSION_COOKIE}=${sessionToken}`;
		const room = 'event:RC1';
		const before = await connected(cookie);
		await before.emitWithAck('subscribe', { rooms: ['board', room], since: null });
		const heard: number[] = [];
		before.on('live', (m: LiveMessage) => heard.push(m.seq));
		record(SYSTEM, 'test.before', 'board', { n: 0 });
		const last = record(SYSTEM, 'test.before', room, { n: 1 });
		await expect.poll(() => heard.at(-1)).toBe(last.seq);
		before.close();

		const meanwhile = [
			record(SYSTEM, 'test.missed', 'board', { n: 2 }),
			record(SYSTEM, 'test.missed', room, { n: 3 }),
			record(SYSTEM, 'test.not-mine', 'event:RC-other', { n: 4 }),
			record(SYSTEM, 'test.missed', 'board', { n: 5 }),
			record(SYSTEM, 'test.missed', room, { n: 6 })
		];
		const after = await connected(cookie);
		const live: LiveMessage[] = [];
		after.on('live', (m: LiveMessage) => live.push(m));
		const answer = await after.emitWithAck('subscribe', { rooms: ['board', room], since: heard.at(-1) });
		const expected = meanwhile.filter((m) => m.type === 'test.missed');
		expect(answer.missed).toEqual(expected);
		// Nothing recorded meanwhile arrives a second time as a broadcast; new ones do arrive.
		const next = record(SYSTEM, 'test.after', room, { n: 7 });
		await expect.poll(() => live.length).toBe(1);
		expect(live[0].seq).toBe(next.seq);
		after.close();
	});

	it('delivers every message once and in order through the browser client, even when broadcasts overtake the catch-up', async () => {
		const room = 'event:RC2';
		const hub = realtimeSlot().io!.of('/live');
		// Record a board message between the reconnecting socket's join and its subscribe request
		// being handled: the broadcast then reaches the client before the catch-up answer.
		let overtake = false;
		const overtaken: LiveMessage[] = [];
		const onConnection = (socket: import('socket.io').Socket) =>
			socket.use(([event], next) => {
				if (event === 'subscribe' && overtake) {
					overtake = false;
					overtaken.push(record(SYSTEM, 'test.overtaking', 'board', { n: -1 }));
				}
				next();
			});
		hub.on('connection', onConnection);
		const client = new LiveConnection({
			url: `${url}/live`,
			socket: { transports: ['websocket'], extraHeaders: { cookie: `${auth.SESSION_COOKIE}=${sessionToken}` }, reconnectionDelay: 400, reconnectionDelayMax: 400, randomizationFactor: 0, forceNew: true }
		});
		const got: ClientMessage[] = [];
		const statuses: string[] = [];
		client.on((m) => got.push(m));
		try {
			client.connect();
			await expect.poll(() => client.status).toBe('live');
			client.join(room);
			await expect.poll(() => watchers(room).map((w) => w.userId)).toEqual([liveUserId]);
			const sent = [record(SYSTEM, 'test.rc', room, { n: 0 }), record(SYSTEM, 'test.rc', 'board', { n: 1 })];
			await expect.poll(() => got.length).toBe(2);

			// Drop the transport from the server side: the client sees a lost connection and retries.
			const serverSocket = [...hub.sockets.values()].find((s) => s.rooms.has(room))!;
			overtake = true;
			serverSocket.conn.close();
			await expect.poll(() => client.status, { interval: 10 }).toBe('offline');
			statuses.push(client.status);
			sent.push(record(SYSTEM, 'test.rc', room, { n: 2 }), record(SYSTEM, 'test.rc', 'board', { n: 3 }), record(SYSTEM, 'test.rc', 'event:RC2-other', { n: 4 }));
			await expect.poll(() => client.status, { timeout: 5000 }).toBe('live');
			statuses.push(client.status);
			sent.push(record(SYSTEM, 'test.rc', room, { n: 5 }));
			await expect.poll(() => got.length).toBe(6);
			await sleep(100);

			expect(overtaken).toHaveLength(1);
			const wanted = [...sent.filter((m) => m.room !== 'event:RC2-other'), ...overtaken].sort((a, b) => a.seq - b.seq);
			expect(got.map((m) => m.seq)).toEqual(wanted.map((m) => m.seq));
			expect(got).toEqual(wanted);
			expect(statuses).toEqual(['offline', 'live']);
			// Presence followed the socket across the reconnect.
			expect(watchers(room).map((w) => w.userId)).toEqual([liveUserId]);
		} finally {
			hub.off('connection', onConnection);
			client.disconnect();
		}
	});
});
