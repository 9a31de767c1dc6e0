import type { Socket } from 'socket.io';
import { and, asc, gt, inArray } from 'drizzle-orm';
import { db, preparedQuery } from './db';
import * as table from './db/schema';
import { realtimeSlot } from './socket-host.js';
import { restartService, service, type Running } from './services';
import type { LiveAction, LiveMessage, LivePayloads, Room } from '../../live-messages.ts';

export type { LiveAction, LiveMessage, LivePayloads, Room };

export interface Actor {
	userId: string | null;
	label: string;
}

export const SYSTEM: Actor = { userId: null, label: 'system' };

/** The part of a signed-in person the hub needs: who acts, and who is watching. */
export interface LivePerson {
	id: string;
	name: string;
}

/**
 * Who may connect and what they may see, supplied by the people stage when the hub is installed
 * (`people/live-access.ts`), so the hub itself knows nothing of sessions, tokens or roles.
 */
export interface LiveAccess {
	/** The principal behind a handshake's session cookie or bearer token; null when neither is valid. */
	identify(handshake: { cookieHeader: string; bearer: string | null }): LivePrincipal | null;
	/** May this principal join the board (`board`) or an event's room (`event`)? */
	mayWatch(principal: LivePrincipal, room: 'board' | 'event'): boolean;
}

export interface LivePrincipal {
	user: LivePerson | null;
	telescopeId: string | null;
}

export function actorOf(user: LivePerson | null, fallback = 'system'): Actor {
	return user ? { userId: user.id, label: user.name } : { userId: null, label: fallback };
}

const CATCH_UP_LIMIT = 2000;

/** An event-log row as the message it was broadcast as (the row holds what `record()` was given). */
function toMessage(row: table.EventLogEntry): LiveMessage {
	return {
		seq: row.seq,
		room: row.room as Room,
		type: row.action,
		actor: row.actorLabel,
		payload: row.payload,
		at: row.createdAt.toISOString()
	} as LiveMessage;
}

/** Emit a message already written to the event log to every client in its room. */
export function publish(message: LiveMessage): void {
	const io = realtimeSlot().io;
	if (!io) return;
	io.of('/live').to(message.room).emit('live', message);
}

type Listener = (message: LiveMessage) => void;

interface PresenceThrottle {
	lastEmitMs: number;
	timer: ReturnType<typeof setTimeout> | null;
}

/** The hub's process-wide state: server-side reactions and who watches which room. */
class HubState implements Running {
	/** In registration order; `action` null hears every action. */
	readonly reactions = new Set<{ action: LiveAction | null; listener: Listener }>();
	readonly presence = new Map<Room, Map<string, { userId: string; name: string }>>();
	readonly presenceThrottles = new Map<Room, PresenceThrottle>();

	stop(): void {
		for (const t of this.presenceThrottles.values()) if (t.timer) clearTimeout(t.timer);
		this.presenceThrottles.clear();
		this.presence.clear();
		this.reactions.clear();
	}
}

const hub = (): HubState => service('live-hub', () => new HubState());

/**
 * Server-side reaction to logged actions (e.g. paging the duty scientist when a significant
 * notice has been processed). Listeners run after the broadcast, in the order they were
 * registered; an exception in one is logged and does not stop the others. Returns the function
 * that removes the listener. Without an action the listener hears every action (tests, logs).
 */
export function onRecorded<A extends LiveAction>(action: A, react: (payload: LivePayloads[A], message: LiveMessage<A>) => void): () => void;
export function onRecorded(listener: (message: LiveMessage) => void): () => void;
export function onRecorded(
	actionOrListener: LiveAction | Listener,
	react?: (payload: LivePayloads[LiveAction], message: LiveMessage) => void
): () => void {
	const entry =
		typeof actionOrListener === 'string'
			? { action: actionOrListener, listener: (m: LiveMessage) => react!(m.payload, m) }
			: { action: null, listener: actionOrListener };
	const { reactions } = hub();
	reactions.add(entry);
	return () => void reactions.delete(entry);
}

/**
 * Write an action to the event log and broadcast it. Call after the change itself has been
 * committed so that no client hears of something the database does not hold.
 */
export function record<A extends LiveAction>(actor: Actor, action: A, room: Room, payload: LivePayloads[A]): LiveMessage<A> {
	const row = db
		.insert(table.eventLog)
		.values({ actorUserId: actor.userId, actorLabel: actor.label, action, room, payload })
		.returning()
		.get();
	const message = toMessage(row);
	publish(message);
	for (const { action: wanted, listener } of hub().reactions) {
		if (wanted !== null && wanted !== action) continue;
		try {
			listener(message);
		} catch (e) {
			console.error(`listener for ${action} failed`, e);
		}
	}
	return message as LiveMessage<A>;
}

/** What a client missed in its rooms since `sinceSeq`, oldest first. */
export function missedSince(rooms: Room[], sinceSeq: number): LiveMessage[] {
	if (rooms.length === 0) return [];
	return db
		.select()
		.from(table.eventLog)
		.where(and(inArray(table.eventLog.room, rooms), gt(table.eventLog.seq, sinceSeq)))
		.orderBy(asc(table.eventLog.seq))
		.limit(CATCH_UP_LIMIT)
		.all()
		.map(toMessage);
}

function bearerOf(socket: Socket): string | null {
	const fromAuth = (socket.handshake.auth as { token?: unknown } | undefined)?.token;
	if (typeof fromAuth === 'string' && fromAuth) return fromAuth;
	const header = socket.handshake.headers.authorization;
	if (header?.startsWith('Bearer ')) return header.slice(7).trim();
	return null;
}

function authenticateWith(access: LiveAccess) {
	return async (socket: Socket): Promise<void> => {
		const principal = access.identify({ cookieHeader: socket.handshake.headers.cookie ?? '', bearer: bearerOf(socket) });
		if (!principal) throw new Error('unauthorised: sign in or present a valid token');
		socket.data.user = principal.user;
		socket.data.telescopeId = principal.telescopeId;
	};
}

interface SubscribeRequest {
	rooms?: unknown;
	since?: unknown;
}

const connectionWith = (access: LiveAccess) => (socket: Socket): void => {
	const principal: LivePrincipal = { user: (socket.data.user as LivePerson | null) ?? null, telescopeId: socket.data.telescopeId ?? null };
	if (!access.mayWatch(principal, 'board')) {
		socket.disconnect(true);
		return;
	}
	socket.join('board');
	socket.on('subscribe', (request: SubscribeRequest, reply?: (answer: unknown) => void) => {
		const rooms = Array.isArray(request?.rooms) ? request.rooms : [];
		const wanted = rooms.filter(
			(r): r is Room => typeof r === 'string' && (r === 'board' || /^event:[A-Za-z0-9_-]{1,64}$/.test(r))
		);
		const allowed = wanted.filter((r) => r === 'board' || access.mayWatch(principal, 'event'));
		for (const r of allowed) socket.join(r);
		const since = typeof request?.since === 'number' && Number.isInteger(request.since) ? request.since : null;
		// Joining and reading the log happen in one synchronous step: nothing recorded in between
		// can be both missing from `missed` and not broadcast to this socket.
		const missed = since === null ? [] : missedSince(allowed, since);
		const presence: Record<string, Watcher[]> = {};
		for (const r of allowed) {
			if (!isWatched(r)) continue;
			if (principal.user) noteWatching(r, socket.id, principal.user);
			presence[r] = watchers(r);
		}
		reply?.({ rooms: allowed, missed, latestSeq: latestSeq(), presence });
	});
	socket.on('unsubscribe', (request: { rooms?: unknown }) => {
		const rooms = Array.isArray(request?.rooms) ? request.rooms : [];
		for (const r of rooms) {
			if (typeof r !== 'string' || r === 'board') continue;
			socket.leave(r);
			if (isWatched(r)) forgetWatching(r as Room, socket.id);
		}
	});
	socket.on('disconnect', () => {
		for (const [room, sockets] of hub().presence) if (sockets.has(socket.id)) forgetWatching(room, socket.id);
	});
};

/** Who is looking at a room right now: one entry per person, `count` = their open connections. */
export interface Watcher {
	userId: string;
	name: string;
	count: number;
}

/** Ephemeral, not an action: sent as the `presence` socket event and never written to the event log. */
export interface PresenceMessage {
	room: Room;
	watchers: Watcher[];
}

/**
 * At most one `presence` emission per room per interval: a page reload or a burst of people
 * opening an alert would otherwise fan out N² messages. The last change always goes out (trailing edge).
 */
export const PRESENCE_INTERVAL_MS = 250;


function isWatched(room: string): room is `event:${string}` {
	return room.startsWith('event:');
}

function noteWatching(room: Room, socketId: string, user: LivePerson): void {
	const { presence } = hub();
	let sockets = presence.get(room);
	if (!sockets) presence.set(room, (sockets = new Map()));
	const before = sockets.get(socketId);
	if (before && before.userId === user.id && before.name === user.name) return;
	sockets.set(socketId, { userId: user.id, name: user.name });
	schedulePresence(room);
}

function forgetWatching(room: Room, socketId: string): void {
	const { presence } = hub();
	const sockets = presence.get(room);
	if (!sockets?.delete(socketId)) return;
	if (sockets.size === 0) presence.delete(room);
	schedulePresence(room);
}

/** The people watching a room, by name; a person with two tabs open is one entry with count 2. */
export function watchers(room: Room): Watcher[] {
	const byUser = new Map<string, Watcher>();
	for (const { userId, name } of hub().presence.get(room)?.values() ?? []) {
		const w = byUser.get(userId);
		if (w) w.count++;
		else byUser.set(userId, { userId, name, count: 1 });
	}
	return [...byUser.values()].sort((a, b) => a.name.localeCompare(b.name) || a.userId.localeCompare(b.userId));
}

function emitPresence(room: Room): void {
	const io = realtimeSlot().io;
	if (!io) return;
	const message: PresenceMessage = { room, watchers: watchers(room) };
	io.of('/live').to(room).emit('presence', message);
}

function schedulePresence(room: Room): void {
	// Throttle state for rooms nobody watches any more is dropped once it can no longer matter.
	const { presence, presenceThrottles } = hub();
	const now = Date.now();
	for (const [r, s] of presenceThrottles) {
		if (r !== room && !s.timer && !presence.has(r) && now - s.lastEmitMs >= PRESENCE_INTERVAL_MS) presenceThrottles.delete(r);
	}
	let state = presenceThrottles.get(room);
	if (!state) presenceThrottles.set(room, (state = { lastEmitMs: -Infinity, timer: null }));
	if (state.timer) return;
	const waitMs = state.lastEmitMs + PRESENCE_INTERVAL_MS - now;
	const fire = () => {
		const s = presenceThrottles.get(room)!;
		s.timer = null;
		s.lastEmitMs = Date.now();
		emitPresence(room);
	};
	if (waitMs <= 0) fire();
	else {
		state.timer = setTimeout(fire, waitMs);
		state.timer.unref?.();
	}
}

/**
 * SQLite's count of commits by other connections to the database file (`PRAGMA data_version`):
 * it changes when another process (the command-line tool, a repair by hand, a test's set-up)
 * writes, which the event log of this process would not show.
 */
function othersVersion(): number {
	return preparedQuery('dataVersion', (d) => d.$client.prepare('PRAGMA data_version').pluck()).get() as number;
}

/**
 * A token that changes whenever something is logged to an event's room or to the board (where
 * telescope, team and catalogue changes go), or another connection writes to the database: what
 * pages built for the event are cached against (`versioned-cache.ts`). Two index lookups on
 * (room, seq) and a pragma.
 */
export function eventVersion(eventId: string): string {
	const row = preparedQuery('eventVersion', (d) =>
		d.$client.prepare(
			"SELECT (SELECT COALESCE(MAX(seq), 0) FROM event_log WHERE room = ?) AS ev, (SELECT COALESCE(MAX(seq), 0) FROM event_log WHERE room = 'board') AS board"
		)
	).get(`event:${eventId}`) as { ev: number; board: number };
	return `${row.ev}.${row.board}.${othersVersion()}`;
}

/** The same for everything on the board: the latest entry of the whole log, and others' writes. */
export function boardVersion(): string {
	return `${latestSeq()}.${othersVersion()}`;
}

export function latestSeq(): number {
	// Prepared once per connection: every board load asks (boardVersion).
	const row = preparedQuery('latestSeq', (d) => d.$client.prepare('SELECT COALESCE(MAX(seq), 0) AS seq FROM event_log')).get() as { seq: number };
	return row.seq;
}

/**
 * Install authentication and room handling on the socket server (created outside SvelteKit by
 * socket-host.js); called from the `init` hook. Returns the function that takes them off again.
 */
export function installRealtime(access: LiveAccess): () => void {
	return restartService('live-socket', () => {
		const slot = realtimeSlot();
		const authenticate = authenticateWith(access);
		const onConnection = connectionWith(access);
		slot.authenticate = authenticate;
		slot.onConnection = onConnection;
		return {
			stop() {
				if (slot.authenticate === authenticate) slot.authenticate = null;
				if (slot.onConnection === onConnection) slot.onConnection = null;
			}
		};
	});
}
