/**
 * Unsubscribe links: a token that names one person and one kind of e-mail (or "everything in my
 * digest"), signed with HMAC-SHA-256 under a server secret, so the link works without signing in
 * and cannot be turned into another person's or another kind's link. The token is
 * base64url(payload ‖ MAC), payload = "1:<kind>:<userId>" in UTF-8. Links do not expire: an
 * unsubscribe link in an old mail should still work.
 */
import { eq } from 'drizzle-orm';
import { hmac } from '@oslojs/crypto/hmac';
import { SHA256 } from '@oslojs/crypto/sha2';
import { constantTimeEqual } from '@oslojs/crypto/subtle';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { config } from '../platform/config';
import { serverSecret } from '../platform/secrets';
import { openToken, sealToken } from '../platform/signed-token';
import { DomainError } from '../platform/errors';
import { KIND_INFO, NOTIFICATION_KINDS, type NotificationKind } from '../../notifications.ts';

const VERSION = '1';
const MAC_BYTES = 32;
const SECRET_NAME = 'unsubscribe';

/** A kind of e-mail, or 'digest': every kind the person has put in their digest. */
export type UnsubscribeScope = NotificationKind | 'digest';

function mac(payload: Uint8Array): Uint8Array {
	return hmac(SHA256, serverSecret(SECRET_NAME), payload);
}

export function unsubscribeToken(userId: string, scope: UnsubscribeScope): string {
	return sealToken(`${VERSION}:${scope}:${userId}`, mac);
}

export function unsubscribeLink(userId: string, scope: UnsubscribeScope): string {
	return `${config.publicUrl}/unsubscribe/${unsubscribeToken(userId, scope)}`;
}

/** The person and scope a token names, or null when it is malformed or its signature does not match. */
export function readUnsubscribeToken(token: string): { userId: string; scope: UnsubscribeScope } | null {
	const opened = openToken(token, 400, MAC_BYTES);
	if (!opened || !constantTimeEqual(opened.mac, mac(opened.payload))) return null;
	const m = /^1:([a-z.-]+):(.+)$/.exec(opened.text);
	if (!m) return null;
	const scope = m[1];
	if (scope !== 'digest' && !(NOTIFICATION_KINDS as readonly string[]).includes(scope)) return null;
	if (scope !== 'digest' && KIND_INFO[scope as NotificationKind].page) return null;
	return { userId: m[2], scope: scope as UnsubscribeScope };
}

export interface UnsubscribeOffer {
	/** First name as the account gives it; enough for the person to recognise the link as theirs. */
	name: string;
	/** What will be switched off, in words. */
	labels: string[];
	kinds: NotificationKind[];
	/** Already off: nothing left to do. */
	alreadyOff: boolean;
}

export class UnsubscribeError extends DomainError {}

const INVALID = 'This unsubscribe link is not valid. It may have been copied incompletely; you can also change your e-mail preferences on your account page after signing in.';

/**
 * What confirming a token would switch off. `current` gives the person's choices per kind
 * (preferences are read by the caller so this module stays free of them).
 */
export function unsubscribeOffer(token: string, current: (userId: string) => Partial<Record<NotificationKind, string>>): UnsubscribeOffer & { userId: string } {
	const read = readUnsubscribeToken(token);
	if (!read) throw new UnsubscribeError(400, 'invalid_link', INVALID);
	const person = db.select({ name: table.user.name, disabledAt: table.user.disabledAt }).from(table.user).where(eq(table.user.id, read.userId)).get();
	if (!person || person.disabledAt) throw new UnsubscribeError(404, 'unknown_person', 'The account this link was made for no longer exists or is disabled: it receives no e-mail.');
	const kinds = current(read.userId);
	const scope: NotificationKind[] =
		read.scope === 'digest' ? NOTIFICATION_KINDS.filter((k) => kinds[k] === 'digest') : [read.scope];
	return {
		userId: read.userId,
		name: person.name.split(/\s+/)[0],
		kinds: scope,
		labels: scope.map((k) => KIND_INFO[k].label),
		alreadyOff: scope.every((k) => kinds[k] === 'off')
	};
}
