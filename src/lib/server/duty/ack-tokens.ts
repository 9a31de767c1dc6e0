/**
 * The one-time acknowledgement carried by every page: a link and a short reply code.
 *
 * The link's token is base64url(payload ‖ MAC), payload = "1:<pageId>:<expiry, seconds, base 36>",
 * MAC = the first 16 bytes of HMAC-SHA-256 under a server secret over the payload and the paged
 * person's id, so a token names one page, works for that page's person only, and cannot be
 * extended. Single use is kept by the page's `page_ack` row (`usedAt`), which also holds the
 * short code a text reply may carry instead.
 */
import { and, eq } from 'drizzle-orm';
import { hmac } from '@oslojs/crypto/hmac';
import { SHA256 } from '@oslojs/crypto/sha2';
import { constantTimeEqual } from '@oslojs/crypto/subtle';
import { randomInt } from 'node:crypto';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { config } from '../platform/config';
import { serverSecret } from '../platform/secrets';
import { openToken, sealToken } from '../platform/signed-token';
import { ACK_LINK_LIFETIME_H } from '../../limits.ts';

const SECRET_NAME = 'page-ack';
const MAC_BYTES = 16;
/** Reply codes avoid letters and digits people confuse (0/O, 1/I/L, 5/S, 2/Z, 8/B). */
const CODE_ALPHABET = 'ACDEFGHJKMNPQRTUVWXY34679';
export const CODE_LENGTH = 6;

function mac(payload: Uint8Array, userId: string): Uint8Array {
	const bound = new Uint8Array([...payload, 0, ...new TextEncoder().encode(userId)]);
	return hmac(SHA256, serverSecret(SECRET_NAME), bound).slice(0, MAC_BYTES);
}

export function ackToken(pageId: string, userId: string, expiresAt: Date): string {
	return sealToken(`1:${pageId}:${Math.floor(expiresAt.getTime() / 1000).toString(36)}`, (payload) => mac(payload, userId));
}

/** The page a token names and when it expires, once its MAC checks against that page's person; null otherwise. */
export function readAckToken(token: string): { pageId: string; userId: string; expiresAt: Date } | null {
	const opened = openToken(token, 200, MAC_BYTES);
	if (!opened) return null;
	const m = /^1:([a-z0-9]{1,64}):([0-9a-z]{1,12})$/.exec(opened.text);
	if (!m) return null;
	const page = db.select({ userId: table.dutyPage.userId }).from(table.dutyPage).where(eq(table.dutyPage.id, m[1])).get();
	if (!page) return null;
	if (!constantTimeEqual(opened.mac, mac(opened.payload, page.userId))) return null;
	return { pageId: m[1], userId: page.userId, expiresAt: new Date(parseInt(m[2], 36) * 1000) };
}

function newCode(): string {
	let s = '';
	for (let i = 0; i < CODE_LENGTH; i++) s += CODE_ALPHABET[randomInt(CODE_ALPHABET.length)];
	return s;
}

export interface IssuedAck {
	link: string;
	code: string;
	expiresAt: Date;
}

/** Make the link and reply code of one page (once: a second call returns a fresh link to the same row). */
export function issueAck(pageId: string, userId: string, now = new Date()): IssuedAck {
	const existing = db.select().from(table.pageAck).where(eq(table.pageAck.pageId, pageId)).get();
	if (existing) return { link: ackLink(pageId, userId, existing.expiresAt), code: existing.code, expiresAt: existing.expiresAt };
	const expiresAt = new Date(Math.floor((now.getTime() + ACK_LINK_LIFETIME_H * 3600_000) / 1000) * 1000);
	for (let attempt = 0; ; attempt++) {
		const code = newCode();
		const clash = db.select({ p: table.pageAck.pageId }).from(table.pageAck).where(and(eq(table.pageAck.userId, userId), eq(table.pageAck.code, code))).get();
		if (clash && attempt < 20) continue;
		db.insert(table.pageAck).values({ pageId, userId, code, expiresAt }).run();
		return { link: ackLink(pageId, userId, expiresAt), code, expiresAt };
	}
}

export function ackLink(pageId: string, userId: string, expiresAt: Date): string {
	return `${config.publicUrl}/ack/${ackToken(pageId, userId, expiresAt)}`;
}

/** The reply code in a text: the first word of CODE_LENGTH code characters, any case. */
export function codeInReply(body: string): string | null {
	const words = body.toUpperCase().match(/[A-Z0-9]+/g) ?? [];
	return words.find((w) => w.length === CODE_LENGTH && [...w].every((c) => CODE_ALPHABET.includes(c))) ?? null;
}
