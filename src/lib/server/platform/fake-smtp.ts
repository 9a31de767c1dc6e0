import { SMTPServer } from 'smtp-server';
import { simpleParser } from 'mailparser';
import { mkdirSync, readdirSync, unlinkSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { listenOnLoopback } from './loopback';

/** A message the local fake SMTP server received, as parsed from the wire. */
export interface ReceivedMail {
	id: number;
	receivedAt: string;
	from: string;
	to: string[];
	subject: string;
	text: string;
	html: string | null;
	/** The List-Unsubscribe header as sent, or null. */
	listUnsubscribe: string | null;
	/** Attached files as received (decoded). */
	attachments: { filename: string; contentType: string; size: number; content: Buffer }[];
}

interface Mailbox {
	server: SMTPServer | null;
	/** Folder that receives the full text of each message, or null for memory only. */
	spoolDir: string | null;
	port: number | null;
	messages: ReceivedMail[];
	nextId: number;
}

const SLOT = Symbol.for('strainline.fake-smtp');
const KEEP = 500;

function mailbox(): Mailbox {
	const g = globalThis as unknown as Record<symbol, Mailbox | undefined>;
	g[SLOT] ??= { server: null, spoolDir: null, port: null, messages: [], nextId: 1 };
	return g[SLOT]!;
}

/** The value of a header as it came over the wire (unfolded), or null. */
function headerLine(lines: readonly { key: string; line: string }[], key: string): string | null {
	const found = lines.find((l) => l.key === key);
	return found ? found.line.slice(found.line.indexOf(':') + 1).replace(/\r?\n\s+/g, ' ').trim() : null;
}

/**
 * Write a caught message whole to the spool folder, the only place its links appear unmasked (the
 * mailbox page masks them): whoever runs the server can open them there. Keeps the newest KEEP files.
 */
function spool(dir: string, mail: ReceivedMail): void {
	try {
		mkdirSync(dir, { recursive: true });
		const name = `${String(Date.now()).padStart(15, '0')}-${String(mail.id).padStart(6, '0')}.txt`;
		const head = [`To: ${mail.to.join(', ')}`, `From: ${mail.from}`, `Subject: ${mail.subject.replace(/\s+/g, ' ')}`, `Date: ${mail.receivedAt}`];
		if (mail.listUnsubscribe) head.push(`List-Unsubscribe: ${mail.listUnsubscribe}`);
		if (mail.attachments.length) head.push(`Attachments: ${mail.attachments.map((a) => `${a.filename} (${a.contentType}, ${a.size} bytes)`).join('; ')}`);
		writeFileSync(join(dir, name), `${head.join('\n')}\n\n${mail.text}`, { mode: 0o600 });
		const files = readdirSync(dir).filter((n) => n.endsWith('.txt')).sort();
		for (const old of files.slice(0, Math.max(0, files.length - KEEP))) unlinkSync(join(dir, old));
	} catch (e) {
		console.error(`[mail] could not write the caught message to ${dir}:`, e);
	}
}

/**
 * Start the development mail catcher on 127.0.0.1 (once per process). It accepts any sender
 * and recipient without authentication, so it never listens beyond loopback. With `spoolDir`,
 * each message is also written whole to that folder.
 */
export async function startFakeSmtp(port: number, spoolDir: string | null = null): Promise<number> {
	const box = mailbox();
	if (box.server && box.port !== null) return box.port;
	box.spoolDir = spoolDir;
	const server = new SMTPServer({
		authOptional: true,
		disabledCommands: ['STARTTLS', 'AUTH'],
		banner: 'Strainline development mail catcher',
		size: 5 * 1024 * 1024,
		onData(stream, session, callback) {
			// No HTML made from a text part (≈ 30 ms per page e-mail on the server's thread, which fell
			// on the night's busiest minute in the live bench); the mailbox shows the text as sent.
			simpleParser(stream, { skipTextToHtml: true })
				.then((parsed) => {
					const to = session.envelope.rcptTo.map((r) => r.address);
					const mail: ReceivedMail = {
						id: box.nextId++,
						receivedAt: new Date().toISOString(),
						from: session.envelope.mailFrom ? session.envelope.mailFrom.address : '',
						to,
						subject: parsed.subject ?? '',
						text: parsed.text ?? '',
						html: typeof parsed.html === 'string' ? parsed.html : null,
						listUnsubscribe: headerLine(parsed.headerLines, 'list-unsubscribe'),
						attachments: parsed.attachments.map((a) => ({ filename: a.filename ?? '', contentType: a.contentType, size: a.size, content: a.content }))
					};
					box.messages.unshift(mail);
					box.messages.length = Math.min(box.messages.length, KEEP);
					if (box.spoolDir) spool(box.spoolDir, mail);
					callback();
				})
				.catch((err: Error) => callback(err));
		}
	});
	const bound = await listenOnLoopback(server, port, () => server.server.address());
	box.server = server;
	box.port = bound;
	return bound;
}

/** The folder caught messages are written to whole, or null. */
export function fakeSmtpSpoolDir(): string | null {
	return mailbox().spoolDir;
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
