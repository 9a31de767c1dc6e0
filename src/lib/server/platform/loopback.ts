/**
 * The local fakes (SMTP, webhook receiver, messaging service) listen on loopback only. They ask
 * for a fixed port so that a developer can find them; when another program holds it they take any
 * free port instead (the port they got is what their pages and the app's senders use).
 */
import type { AddressInfo } from 'node:net';

/** Anything that listens like `net.Server` (an `http.Server`, an `SMTPServer`). */
interface Listening {
	once(event: 'error', listener: (err: Error) => void): unknown;
	removeListener(event: 'error', listener: (err: Error) => void): unknown;
	listen(port: number, host: string, done: () => void): unknown;
}

/** Listen on 127.0.0.1:`port`, or on a free port when that one is taken; resolves to the port bound. */
export async function listenOnLoopback(server: Listening, port: number, address: () => AddressInfo | string | null): Promise<number> {
	const listen = (p: number) =>
		new Promise<number>((resolve, reject) => {
			server.once('error', reject);
			server.listen(p, '127.0.0.1', () => {
				server.removeListener('error', reject);
				resolve((address() as AddressInfo).port);
			});
		});
	try {
		return await listen(port);
	} catch (e) {
		if ((e as NodeJS.ErrnoException).code !== 'EADDRINUSE') throw e;
		return listen(0);
	}
}
