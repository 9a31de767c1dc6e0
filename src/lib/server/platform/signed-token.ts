/**
 * Tokens carried in links that work without signing in (unsubscribe, page acknowledgement):
 * base64url(payload ‖ MAC), the payload a short UTF-8 text. Each user of this module keeps its own
 * secret, MAC (what it binds) and payload grammar; this is only the framing.
 */
import { decodeBase64urlIgnorePadding, encodeBase64urlNoPadding } from '@oslojs/encoding';

/** base64url(payload ‖ mac(payload)). */
export function sealToken(payload: string, mac: (payload: Uint8Array) => Uint8Array): string {
	const bytes = new TextEncoder().encode(payload);
	const tag = mac(bytes);
	const out = new Uint8Array(bytes.length + tag.length);
	out.set(bytes);
	out.set(tag, bytes.length);
	return encodeBase64urlNoPadding(out);
}

/** The payload (bytes and text) and the MAC of a token, or null when it is not one (too long, not base64url, no payload). */
export function openToken(token: string, maxLength: number, macBytes: number): { payload: Uint8Array; text: string; mac: Uint8Array } | null {
	if (!token || token.length > maxLength || !/^[A-Za-z0-9_-]+$/.test(token)) return null;
	let raw: Uint8Array;
	try {
		raw = decodeBase64urlIgnorePadding(token);
	} catch {
		return null;
	}
	if (raw.length <= macBytes) return null;
	const payload = raw.slice(0, raw.length - macBytes);
	return { payload, text: new TextDecoder().decode(payload), mac: raw.slice(raw.length - macBytes) };
}
