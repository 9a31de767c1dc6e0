/**
 * Benchmark-only process: Strainline's own live hub (the `realtime.ts` and `socket-host.js` the app
 * uses, on the app's SQLite database) on a plain HTTP server, plus a loopback driver endpoint
 * `POST /bench/action` that authenticates the caller's API token as the app's hooks do and then
 * calls `record()` — the call every mutating route makes after committing its change.
 *
 * The driver lives here, not in the app: claims and observations have no routes yet, and the app
 * gets no test-only routes. When those routes exist, the benchmark should drive them instead.
 *
 * Env: DATABASE_URL (a seeded file), PORT. Listens on 127.0.0.1 only. Prints `ready` on stdout.
 */
import http from 'node:http';
import { openDatabase } from '../../../src/lib/server/db/index.ts';
import { attachSocketIO, realtimeSlot } from '../../../src/lib/server/socket-host.js';
import { actorOf, installRealtime, record, type Room } from '../../../src/lib/server/realtime.ts';
import { validateApiToken } from '../../../src/lib/server/auth.ts';
import { can } from '../../../src/lib/server/permissions.ts';
import { nowMs, readBody, type DriveRequest } from './protocol.ts';

openDatabase(process.env.DATABASE_URL!);
installRealtime();

const recordMs: number[] = [];

const server = http.createServer(async (req, res) => {
	if (req.method === 'POST' && req.url === '/bench/action') {
		const header = req.headers.authorization ?? '';
		const principal = header.startsWith('Bearer ') ? validateApiToken(header.slice(7)) : null;
		if (!principal || !can(principal, 'events.view')) {
			res.writeHead(401).end();
			return;
		}
		const body = JSON.parse(await readBody(req)) as DriveRequest;
		const t0 = nowMs();
		const message = record(actorOf(principal.user), body.type, body.room as Room, body.payload);
		recordMs.push(nowMs() - t0);
		res.writeHead(200, { 'content-type': 'application/json' }).end(JSON.stringify({ seq: message.seq }));
		return;
	}
	if (req.method === 'GET' && req.url === '/bench/stats') {
		res.writeHead(200, { 'content-type': 'application/json' }).end(JSON.stringify({ recordMs }));
		return;
	}
	res.writeHead(404).end();
});
attachSocketIO(server);
server.listen(Number(process.env.PORT), '127.0.0.1', () => process.stdout.write('ready\n'));

function shutdown() {
	realtimeSlot().io?.close();
	server.close(() => process.exit(0));
	setTimeout(() => process.exit(0), 2000).unref();
}
process.on('SIGTERM', shutdown);
process.on('SIGINT', shutdown);
