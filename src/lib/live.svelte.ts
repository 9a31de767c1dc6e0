import { io, type ManagerOptions, type Socket, type SocketOptions } from 'socket.io-client';
import type { LiveMessage } from './live-messages.ts';

export type { LiveMessage };

export type LiveStatus = 'connecting' | 'live' | 'offline' | 'refused';

/** One person watching a room; `count` is how many tabs or devices they have open on it. */
export interface Watcher {
	userId: string;
	name: string;
	count: number;
}

interface SubscribeAnswer {
	rooms?: string[];
	missed?: LiveMessage[];
	latestSeq?: number;
	presence?: Record<string, Watcher[]>;
}

type Listener = (message: LiveMessage) => void;

export interface LiveOptions {
	/** Where the hub is; the page's own origin by default. */
	url?: string;
	/** Passed to socket.io-client (programs and tests authenticate with `auth: { token }`). */
	socket?: Partial<ManagerOptions & SocketOptions>;
}

/**
 * The browser's end of the live hub. Keeps the last sequence number it has seen and, after a
 * lost connection, asks the server for everything newer, so listeners see each message once and
 * in order. Also keeps who is watching each joined event room (`presence`).
 */
export class LiveConnection {
	status = $state<LiveStatus>('connecting');
	lastSeq = $state(0);
	since = $state<Date | null>(null);
	/** Watchers per room, as last told by the hub; kept (possibly stale) while offline. */
	presence = $state<Record<string, Watcher[]>>({});
	private socket: Socket | null = null;
	/** Rooms with the number of components that asked for them; `board` is always joined. */
	private rooms = new Map<string, number>([['board', 1]]);
	private listeners = new Set<Listener>();
	/** Whether `lastSeq` is a position in the log (false until the first subscribe answer). */
	private synced = false;
	/** Live messages that arrive while a catch-up request is in flight. */
	private held: LiveMessage[] | null = null;

	constructor(private readonly options: LiveOptions = {}) {}

	connect(): void {
		if (this.socket) return;
		const socket = io(this.options.url ?? '/live', {
			path: '/socket.io',
			withCredentials: true,
			transports: ['websocket', 'polling'],
			...this.options.socket
		});
		this.socket = socket;
		socket.on('connect', () => {
			// The server puts the socket in `board` as soon as it connects, so broadcasts can
			// overtake the catch-up answer: hold them until the missed ones have been delivered.
			this.held = [];
			const since = this.synced ? this.lastSeq : null;
			socket.emit('subscribe', { rooms: [...this.rooms.keys()], since }, (answer: SubscribeAnswer) => {
				const held = this.held ?? [];
				this.held = null;
				const backlog = [...(answer?.missed ?? []), ...held].sort((a, b) => a.seq - b.seq);
				for (const m of backlog) this.deliver(m);
				if (!this.synced) {
					this.lastSeq = Math.max(this.lastSeq, answer?.latestSeq ?? 0);
					this.synced = true;
				}
				this.takePresence(answer?.presence);
				this.status = 'live';
				this.since = new Date();
			});
		});
		socket.on('live', (m: LiveMessage) => {
			if (this.held) this.held.push(m);
			else this.deliver(m);
		});
		socket.on('presence', (p: { room: string; watchers: Watcher[] }) => {
			if (this.rooms.has(p.room)) this.presence[p.room] = p.watchers;
		});
		socket.on('disconnect', () => {
			this.held = null;
			this.status = 'offline';
			this.since = new Date();
		});
		socket.on('connect_error', (err: Error) => {
			this.status = err.message.startsWith('unauthorised') ? 'refused' : 'offline';
		});
	}

	private deliver(m: LiveMessage): void {
		if (m.seq <= this.lastSeq) return;
		this.lastSeq = m.seq;
		for (const l of this.listeners) l(m);
	}

	private takePresence(presence: Record<string, Watcher[]> | undefined): void {
		for (const [room, list] of Object.entries(presence ?? {})) if (this.rooms.has(room)) this.presence[room] = list;
	}

	/** Join a room; pair every call with `leave` (components that share a room each hold it). */
	join(room: string): void {
		const n = this.rooms.get(room) ?? 0;
		this.rooms.set(room, n + 1);
		if (n > 0 || !this.socket?.connected) return; // the next (re)connect subscribes to every room
		this.socket.emit('subscribe', { rooms: [room], since: null }, (answer: SubscribeAnswer) => this.takePresence(answer?.presence));
	}

	leave(room: string): void {
		const n = this.rooms.get(room) ?? 0;
		if (room === 'board' || n === 0) return;
		if (n > 1) {
			this.rooms.set(room, n - 1);
			return;
		}
		this.rooms.delete(room);
		delete this.presence[room];
		if (this.socket?.connected) this.socket.emit('unsubscribe', { rooms: [room] });
	}

	/** Who is watching `room` now (empty until the hub has answered). */
	watchers(room: string): Watcher[] {
		return this.presence[room] ?? [];
	}

	/** Subscribe to messages; returns the unsubscribe function (use it in an $effect cleanup). */
	on(listener: Listener): () => void {
		this.listeners.add(listener);
		return () => this.listeners.delete(listener);
	}

	disconnect(): void {
		this.socket?.close();
		this.socket = null;
	}
}
