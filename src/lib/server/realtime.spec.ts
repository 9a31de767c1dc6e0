import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { io as connect, type Socket } from 'socket.io-client';
import { createTestDatabase } from './testing/database';
import { attachSocketIO, realtimeSlot } from './socket-host.js';
import { installRealtime, record, SYSTEM, type LiveMessage } from './realtime';
import * as auth from './auth';
import { createUser } from './people';
import { issueToken } from './tokens';

let server: http.Server;
let url: string;
let sessionToken: string;
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
	sessionToken = auth.generateSessionToken();
	auth.createSession(sessionToken, userId);
	server = http.createServer((_req, res) => res.end('ok'));
	attachSocketIO(server);
	installRealtime();
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
		const { revokeToken } = await import('./tokens');
		revokeToken(SYSTEM, id);
		expect(await outcome(open({ auth: { token: secret } }))).toMatch(/unauthorised/);
	});

	it('refuses the default namespace', async () => {
		const s = connect(url, { transports: ['websocket'], reconnection: false, forceNew: true });
		sockets.push(s);
		expect(await outcome(s)).toMatch(/live namespace/);
	});
});
