// Plain JavaScript on purpose: loaded by vite.config.ts (dev/preview) and by server.js
// (production) outside SvelteKit's module graph. It only creates the socket.io server;
// SvelteKit's `init` hook (src/lib/server/realtime.ts) installs authentication and the
// connection handler through the shared slot below. Until then every handshake is refused.
import { Server } from 'socket.io';

const SLOT = Symbol.for('strainline.realtime');

/**
 * @typedef {{
 *   io: import('socket.io').Server | null,
 *   authenticate: null | ((socket: import('socket.io').Socket) => Promise<void>),
 *   onConnection: null | ((socket: import('socket.io').Socket) => void)
 * }} RealtimeSlot
 * @returns {RealtimeSlot}
 */
export function realtimeSlot() {
	const g = /** @type {any} */ (globalThis);
	if (!g[SLOT]) g[SLOT] = { io: null, authenticate: null, onConnection: null };
	return g[SLOT];
}

/**
 * Attach the live hub to an HTTP server (once per process).
 * @param {import('node:http').Server} httpServer
 */
export function attachSocketIO(httpServer) {
	const slot = realtimeSlot();
	if (slot.io) return slot.io;
	const io = new Server(httpServer, { path: '/socket.io', serveClient: false });
	const live = io.of('/live');
	live.use((socket, next) => {
		const authenticate = realtimeSlot().authenticate;
		if (!authenticate) return next(new Error('starting'));
		authenticate(socket).then(
			() => next(),
			(err) => next(err instanceof Error ? err : new Error('unauthorised'))
		);
	});
	live.on('connection', (socket) => {
		const onConnection = realtimeSlot().onConnection;
		if (onConnection) onConnection(socket);
		else socket.disconnect(true);
	});
	// The default namespace is unused: refuse it rather than leave an open door.
	io.use((_socket, next) => next(new Error('use the /live namespace')));
	slot.io = io;
	return io;
}
