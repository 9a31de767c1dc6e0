import { io, type Socket } from 'socket.io-client';

export type LiveStatus = 'connecting' | 'live' | 'offline' | 'refused';

export interface LiveMessage {
	seq: number;
	room: string;
	type: string;
	actor: string;
	payload: Record<string, unknown>;
	at: string;
}

type Listener = (message: LiveMessage) => void;

/**
 * The browser's end of the live hub. Keeps the last sequence number it has seen and, after a
 * lost connection, asks the server for everything newer, so listeners see each message once.
 */
export class LiveConnection {
	status = $state<LiveStatus>('connecting');
	lastSeq = $state(0);
	since = $state<Date | null>(null);
	private socket: Socket | null = null;
	private rooms = new Set<string>(['board']);
	private listeners = new Set<Listener>();

	connect(): void {
		if (this.socket) return;
		const socket = io('/live', { path: '/socket.io', withCredentials: true, transports: ['websocket', 'polling'] });
		this.socket = socket;
		socket.on('connect', () => {
			socket.emit('subscribe', { rooms: [...this.rooms], since: this.lastSeq || null }, (answer: { missed: LiveMessage[]; latestSeq: number }) => {
				for (const m of answer?.missed ?? []) this.deliver(m);
				if (!this.lastSeq && answer?.latestSeq) this.lastSeq = answer.latestSeq;
				this.status = 'live';
				this.since = new Date();
			});
		});
		socket.on('live', (m: LiveMessage) => this.deliver(m));
		socket.on('disconnect', () => {
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

	join(room: string): void {
		this.rooms.add(room);
		this.socket?.emit('subscribe', { rooms: [room], since: null });
	}

	leave(room: string): void {
		this.rooms.delete(room);
		this.socket?.emit('unsubscribe', { rooms: [room] });
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
