// Production entry: adapter-node's handler and the socket.io live hub on one HTTP server.
// The handler is registered first: engine.io wraps the listeners present when it attaches and
// keeps /socket.io requests for itself.
import http from 'node:http';
import { attachSocketIO } from './src/lib/server/platform/socket-host.js';

// Uploaded sky maps are larger than adapter-node's 512 kB default body limit, and a JSON notice
// may carry a sky map of up to SKYMAP_MAX_MB (64 MiB by default) in base64: about 86 MiB in all.
process.env.BODY_SIZE_LIMIT ??= '96M';
const { handler } = await import('./build/handler.js');

// The messaging service posts its inbound webhook form-encoded and without an Origin header, which
// SvelteKit refuses as a cross-site form post before any hook runs. That one path takes no cookies
// and checks the service's signature instead, so it is given our own origin here.
const INBOUND_HOOK = '/api/v1/phone/inbound';
const ownOrigin = (process.env.ORIGIN || process.env.PUBLIC_URL || '').replace(/\/$/, '');
function withHookOrigin(req, res) {
	if (ownOrigin && req.method === 'POST' && !req.headers.origin && req.url?.split('?')[0] === INBOUND_HOOK) req.headers.origin = ownOrigin;
	return handler(req, res);
}
const server = http.createServer(withHookOrigin);
attachSocketIO(server);

const port = Number(process.env.PORT ?? 3000);
const host = process.env.HOST ?? '127.0.0.1';
server.listen(port, host, () => {
	console.log(`Strainline listening on http://${host}:${port}`);
});

function shutdown() {
	server.close(() => process.exit(0));
	setTimeout(() => process.exit(0), 3000).unref();
}
process.on('SIGTERM', shutdown);
process.on('SIGINT', shutdown);
