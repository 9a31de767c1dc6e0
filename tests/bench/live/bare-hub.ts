/**
 * The benchmark's reference: a bare socket.io server with the same namespace, room join and
 * broadcast, and a driver endpoint `POST /bench/action` that emits the posted message at once —
 * no authentication, no database, no validation, no presence. Sequence numbers come from a
 * counter. Env: PORT. Listens on 127.0.0.1 only. Prints `ready` on stdout.
 */
import http from 'node:http';
import { Server } from 'socket.io';
import { readBody, type DriveRequest } from './protocol.ts';

let seq = 0;
const server = http.createServer(async (req, res) => {
	if (req.method === 'POST' && req.url === '/bench/action') {
		const body = JSON.parse(await readBody(req)) as DriveRequest;
		const message = { seq: ++seq, room: body.room, type: body.type, actor: 'bench', payload: body.payload, at: new Date().toISOString() };
		io.of('/live').to(body.room).emit('live', message);
		res.writeHead(200, { 'content-type': 'application/json' }).end(JSON.stringify({ seq: message.seq }));
		return;
	}
	res.writeHead(404).end();
});
const io = new Server(server, { path: '/socket.io', serveClient: false });
io.of('/live').on('connection', (socket) => {
	socket.join('board');
	socket.on('subscribe', (request: { rooms?: string[] }, reply?: (a: unknown) => void) => {
		const rooms = Array.isArray(request?.rooms) ? request.rooms.filter((r) => typeof r === 'string') : [];
		for (const r of rooms) socket.join(r);
		reply?.({ rooms, missed: [], latestSeq: seq });
	});
});
server.listen(Number(process.env.PORT), '127.0.0.1', () => process.stdout.write('ready\n'));

function shutdown() {
	io.close();
	server.close(() => process.exit(0));
	setTimeout(() => process.exit(0), 2000).unref();
}
process.on('SIGTERM', shutdown);
process.on('SIGINT', shutdown);
