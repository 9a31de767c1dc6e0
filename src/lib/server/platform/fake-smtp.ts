import { SMTPServer } from 'smtp-server';
import { simpleParser } from 'mailparser';
import type { AddressInfo } from 'node:net';

/** A message the local fake SMTP server received, as parsed from the wire. */
export interface ReceivedMail {
	id: number;
	receivedAt: string;
	from: string;
	to: string[];
	subject: string;
	text: string;
	html: string | null;
}

interface Mailbox {
	server: SMTPServer | null;
	port: number | null;
	messages: ReceivedMail[];
	nextId: number;
}

const SLOT = Symbol.for('strainline.fake-smtp');
const KEEP = 500;

function mailbox(): Mailbox {
	const g = globalThis as unknown as Record<symbol, Mailbox | undefined>;
	g[SLOT] ??= { server: null, port: null, messages: [], nextId: 1 };
	return g[SLOT]!;
}

/**
 * Start the development mail catcher on 127.0.0.1 (once per process). It accepts any sender
 * and recipient without authentication, so it never listens beyond loopback.
 */
export async function startFakeSmtp(port: number): Promise<number> {
	const box = mailbox();
	if (box.server && box.port !== null) return box.port;
	const server = new SMTPServer({
		authOptional: true,
		disabledCommands: ['STARTTLS', 'AUTH'],
		banner: 'Strainline development mail catcher',
		size: 5 * 1024 * 1024,
		onData(stream, session, callback) {
			simpleParser(stream)
				.then((parsed) => {
					const to = session.envelope.rcptTo.map((r) => r.address);
					box.messages.unshift({
						id: box.nextId++,
						receivedAt: new Date().toISOString(),
						from: session.envelope.mailFrom ? session.envelope.mailFrom.address : '',
						to,
						subject: parsed.subject ?? '',
						text: parsed.text ?? '',
						html: typeof parsed.html === 'string' ? parsed.html : null
					});
					box.messages.length = Math.min(box.messages.length, KEEP);
					callback();
				})
				.catch((err: Error) => callback(err));
		}
	});
	const listen = (p: number) =>
		new Promise<number>((resolve, reject) => {
			server.once('error', reject);
			server.listen(p, '127.0.0.1', () => {
				server.removeListener('error', reject);
				resolve((server.server.address() as AddressInfo).port);
			});
		});
	let bound: number;
	try {
		bound = await listen(port);
	} catch (e) {
		if ((e as NodeJS.ErrnoException).code !== 'EADDRINUSE') throw e;
		bound = await listen(0);
	}
	box.server = server;
	box.port = bound;
	return bound;
}

export function fakeSmtpPort(): number | null {
	return mailbox().port;
}

export function receivedMail(): readonly ReceivedMail[] {
	return mailbox().messages;
}

export async function stopFakeSmtp(): Promise<void> {
	const box = mailbox();
	if (!box.server) return;
	await new Promise<void>((resolve) => box.server!.close(() => resolve()));
	box.server = null;
	box.port = null;
}
