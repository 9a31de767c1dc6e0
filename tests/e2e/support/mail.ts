import { expect } from '@playwright/test';
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';

/**
 * Where the app's development mail catcher writes the full text of each message it receives
 * (the mailbox page masks the secret part of links; the files on the server's disk do not).
 */
export const MAIL_DIR = join(process.env.STORAGE_DIR ?? 'tests/e2e/.artifacts/storage', 'mail');

interface CaughtMail {
	to: string;
	subject: string;
	text: string;
	/** The List-Unsubscribe header, '' when the mail has none. */
	listUnsubscribe: string;
	/** The "Attachments:" line of the caught file: `name (type, N bytes); …`, '' without any. */
	attachments: string;
}

function readAll(): CaughtMail[] {
	let names: string[];
	try {
		names = readdirSync(MAIL_DIR).filter((n) => n.endsWith('.txt'));
	} catch {
		return [];
	}
	return names
		.sort()
		.reverse()
		.map((n) => {
			const raw = readFileSync(join(MAIL_DIR, n), 'utf8');
			const [head, ...body] = raw.split('\n\n');
			const field = (k: string) => head.split('\n').find((l) => l.startsWith(`${k}: `))?.slice(k.length + 2) ?? '';
			return { to: field('To'), subject: field('Subject'), text: body.join('\n\n'), listUnsubscribe: field('List-Unsubscribe'), attachments: field('Attachments') };
		});
}

/** The newest caught message to `to` whose subject holds `subject` (waits up to 10 s for it). */
export async function newestMail(to: string, subject: string): Promise<CaughtMail> {
	let found: CaughtMail | undefined;
	await expect
		.poll(() => (found = readAll().find((m) => m.to.split(', ').includes(to) && m.subject.includes(subject))), { timeout: 10_000 })
		.toBeTruthy();
	return found!;
}

/** The first link in a message whose path starts with `prefix` (e.g. '/reset/'), as a path. */
export function linkIn(mail: CaughtMail, prefix: string): string {
	const url = mail.text.match(/https?:\/\/\S+/g)?.map((u) => new URL(u)).find((u) => u.pathname.startsWith(prefix));
	if (!url) throw new Error(`no ${prefix} link in the mail "${mail.subject}"`);
	return url.pathname;
}
