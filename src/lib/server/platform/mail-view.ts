/**
 * Mail text as the development mailbox shows it: split into text and link parts that the page
 * renders as plain Svelte text and `<a>` elements (no HTML is ever built from mail text), with the
 * secrets in links masked. The mailbox is read by an administrator, but a reset or invitation link
 * belongs to the person it was sent to: shown whole, it would let the reader take over that account.
 */

export type MailPart = { kind: 'text'; text: string } | { kind: 'link'; href: string; text: string };

export const MASK = '••••••';

// The links people.invitationLink, people.resetLink, unsubscribeLink and ackLink make: the last path segment is the token.
const SECRET_PATH = /(\/(?:invitation|reset|unsubscribe|ack)\/)[^/?#]+/g;
// Anything else that looks like a token: a long query value or path segment of token characters.
const SECRET_QUERY_VALUE = /([?&][^=&#]+=)[A-Za-z0-9_-]{16,}/g;
const SECRET_SEGMENT = /\/[A-Za-z0-9_-]{32,}(?=[/?#]|$)/g;

const URL_IN_TEXT = /https?:\/\/[^\s<>]+/g;
// Sentence punctuation right after a link belongs to the sentence.
const TRAILING = /[.,;:!?)\]'"]+$/;

function masked(url: string): string {
	return url.replace(SECRET_PATH, `$1${MASK}`).replace(SECRET_QUERY_VALUE, `$1${MASK}`).replace(SECRET_SEGMENT, `/${MASK}`);
}

export function mailParts(text: string): MailPart[] {
	const parts: MailPart[] = [];
	let plain = '';
	let last = 0;
	for (const m of text.matchAll(URL_IN_TEXT)) {
		let raw = m[0];
		// Keep quotes that are part of the path (they are encoded in the href); drop sentence punctuation.
		const tail = raw.match(TRAILING)?.[0] ?? '';
		if (tail && !/["']/.test(tail)) raw = raw.slice(0, raw.length - tail.length);
		plain += text.slice(last, m.index);
		last = m.index! + raw.length;
		const safe = masked(raw);
		let href: string | null = null;
		try {
			href = safe === raw ? new URL(raw).href : null;
		} catch {
			href = null;
		}
		if (href === null) {
			plain += safe;
			continue;
		}
		if (plain) parts.push({ kind: 'text', text: plain });
		plain = '';
		parts.push({ kind: 'link', href, text: raw });
	}
	plain += text.slice(last);
	if (plain) parts.push({ kind: 'text', text: plain });
	return parts;
}
