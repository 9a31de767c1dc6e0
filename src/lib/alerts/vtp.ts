/**
 * VOEvent Transport Protocol (VTP) message layer: framing and Transport messages. Pure, no sockets.
 *
 * Following the IVOA VTP document (Note 2009, Recommendation 2.0 of 2017; details from memory):
 * every message on the TCP stream is preceded by its length in bytes as a 4-byte big-endian
 * unsigned integer. A message is either a VOEvent or a `Transport` element (namespace
 * http://telescope-networks.org/schema/Transport/v1.1) whose `role` is `iamalive`, `ack`, `nak`
 * (or `authenticate`, unused here), with children `Origin` (IVORN of the party or event the message
 * is about), `Response` (IVORN of the party answering), `TimeStamp` (ISO-8601 UTC) and optional
 * `Meta` (for a nak we put the reason in `Meta/Result`).
 */
import { XMLParser, XMLValidator } from 'fast-xml-parser';

export const TRANSPORT_NS = 'http://telescope-networks.org/schema/Transport/v1.1';

/** Frames larger than this are refused by default: a notice is a few kB; 1 MiB leaves room. */
export const DEFAULT_MAX_FRAME_BYTES = 1024 * 1024;

export type TransportRole = 'iamalive' | 'ack' | 'nak' | 'authenticate';
const ROLES: readonly TransportRole[] = ['iamalive', 'ack', 'nak', 'authenticate'];

export interface TransportMessage {
	role: TransportRole;
	origin: string | null;
	response: string | null;
	timestamp: string | null;
	/** Free text carried in Meta/Result (the reason of a nak). */
	result: string | null;
}

export class FrameError extends Error {
	override name = 'FrameError';
}

/** Prefix a payload with its 4-byte big-endian length. */
export function encodeFrame(payload: string | Uint8Array): Buffer {
	const body = typeof payload === 'string' ? Buffer.from(payload, 'utf8') : Buffer.from(payload);
	if (body.length > 0xffffffff) throw new FrameError('payload longer than 2^32 - 1 bytes');
	const out = Buffer.allocUnsafe(4 + body.length);
	out.writeUInt32BE(body.length, 0);
	body.copy(out, 4);
	return out;
}

/**
 * Streaming decoder: feed it whatever TCP delivered; it returns the complete payloads so far.
 * A message split across reads is held until complete; several joined in one read all come out.
 * A declared length above `maxFrameBytes` throws {@link FrameError} at once, before the body
 * arrives, and the decoder then refuses all further input (the stream is out of step: close it).
 */
export class FrameDecoder {
	readonly maxFrameBytes: number;
	private chunks: Buffer[] = [];
	private buffered = 0;
	private expected = -1;
	private broken: string | null = null;

	constructor(opts: { maxFrameBytes?: number } = {}) {
		this.maxFrameBytes = opts.maxFrameBytes ?? DEFAULT_MAX_FRAME_BYTES;
	}

	/** Bytes held that do not yet make a whole frame. */
	get pendingBytes(): number {
		return this.buffered + (this.expected >= 0 ? 4 : 0);
	}

	push(chunk: Uint8Array): Buffer[] {
		if (this.broken) throw new FrameError(this.broken);
		if (chunk.length > 0) {
			this.chunks.push(Buffer.isBuffer(chunk) ? chunk : Buffer.from(chunk));
			this.buffered += chunk.length;
		}
		const out: Buffer[] = [];
		for (;;) {
			if (this.expected < 0) {
				if (this.buffered < 4) break;
				const len = this.take(4).readUInt32BE(0);
				if (len > this.maxFrameBytes) {
					this.broken = `frame of ${len} bytes exceeds the ${this.maxFrameBytes}-byte limit`;
					this.chunks = [];
					this.buffered = 0;
					throw new FrameError(this.broken);
				}
				this.expected = len;
			}
			if (this.buffered < this.expected) break;
			out.push(this.take(this.expected));
			this.expected = -1;
		}
		return out;
	}

	/** Remove and return the first n buffered bytes (n ≤ buffered). */
	private take(n: number): Buffer {
		if (n === 0) return Buffer.alloc(0);
		const first = this.chunks[0];
		if (first.length >= n) {
			const head = first.subarray(0, n);
			if (first.length === n) this.chunks.shift();
			else this.chunks[0] = first.subarray(n);
			this.buffered -= n;
			return Buffer.from(head);
		}
		const out = Buffer.allocUnsafe(n);
		let filled = 0;
		while (filled < n) {
			const c = this.chunks[0];
			const need = n - filled;
			if (c.length <= need) {
				c.copy(out, filled);
				filled += c.length;
				this.chunks.shift();
			} else {
				c.copy(out, filled, 0, need);
				this.chunks[0] = c.subarray(need);
				filled += need;
			}
		}
		this.buffered -= n;
		return out;
	}
}

function escapeXml(s: string): string {
	return s.replace(/[<>&"']/g, (c) => ({ '<': '&lt;', '>': '&gt;', '&': '&amp;', '"': '&quot;', "'": '&apos;' })[c]!);
}

export interface BuildTransportOptions {
	role: TransportRole;
	origin?: string | null;
	response?: string | null;
	/** Defaults to now. */
	timestamp?: Date | string;
	result?: string | null;
}

/** Serialise a Transport message. */
export function buildTransport(o: BuildTransportOptions): string {
	const ts = o.timestamp === undefined ? new Date().toISOString() : typeof o.timestamp === 'string' ? o.timestamp : o.timestamp.toISOString();
	const parts = [
		`<?xml version="1.0" encoding="UTF-8"?>`,
		`<trn:Transport xmlns:trn="${TRANSPORT_NS}" role="${o.role}" version="1.0">`
	];
	if (o.origin) parts.push(`  <Origin>${escapeXml(o.origin)}</Origin>`);
	if (o.response) parts.push(`  <Response>${escapeXml(o.response)}</Response>`);
	parts.push(`  <TimeStamp>${escapeXml(ts)}</TimeStamp>`);
	if (o.result) parts.push(`  <Meta><Result>${escapeXml(o.result)}</Result></Meta>`);
	parts.push(`</trn:Transport>`);
	return parts.join('\n');
}

/** A broker's keep-alive (`origin` = broker) or a subscriber's answer (`response` = subscriber). */
export function buildIamalive(origin: string, response?: string, timestamp?: Date | string): string {
	return buildTransport({ role: 'iamalive', origin, response, timestamp });
}

/** Acknowledge receipt of the VOEvent `eventIvorn` on behalf of `responder`. */
export function buildAck(eventIvorn: string, responder: string, timestamp?: Date | string): string {
	return buildTransport({ role: 'ack', origin: eventIvorn, response: responder, timestamp });
}

/** Refuse the VOEvent `eventIvorn`, with a reason. */
export function buildNak(eventIvorn: string, responder: string, reason?: string, timestamp?: Date | string): string {
	return buildTransport({ role: 'nak', origin: eventIvorn, response: responder, timestamp, result: reason ?? null });
}

const parser = new XMLParser({
	ignoreAttributes: false,
	attributeNamePrefix: '@_',
	removeNSPrefix: true,
	parseTagValue: false,
	parseAttributeValue: false,
	trimValues: true,
	processEntities: false,
	ignoreDeclaration: true,
	ignorePiTags: true
});

function unescapeXml(s: string): string {
	return s.replace(/&(lt|gt|amp|quot|apos|#\d{1,7}|#x[0-9a-fA-F]{1,6});/g, (_, r: string) => {
		if (r[0] === '#') return String.fromCodePoint(r[1] === 'x' ? parseInt(r.slice(2), 16) : parseInt(r.slice(1), 10));
		return ({ lt: '<', gt: '>', amp: '&', quot: '"', apos: "'" } as Record<string, string>)[r];
	});
}

function text(x: unknown): string | null {
	if (x === undefined || x === null) return null;
	if (typeof x === 'object') {
		const t = (x as Record<string, unknown>)['#text'];
		return t === undefined ? null : unescapeXml(String(t)).trim() || null;
	}
	return unescapeXml(String(x)).trim() || null;
}

/** Parse a Transport message; throws with a one-line reason otherwise. */
export function parseTransport(xml: string): TransportMessage {
	if (xml.length > 64 * 1024) throw new Error('Transport message longer than 64 kB');
	if (/<!(DOCTYPE|ENTITY)/i.test(xml)) throw new Error('DOCTYPE/ENTITY declarations are refused');
	const v = XMLValidator.validate(xml);
	if (v !== true) throw new Error(`malformed Transport XML at line ${v.err.line}: ${v.err.msg}`);
	const doc = parser.parse(xml) as Record<string, unknown>;
	const t = doc.Transport as Record<string, unknown> | undefined;
	if (!t || typeof t !== 'object') throw new Error('root element is not Transport');
	const role = String(t['@_role'] ?? '').toLowerCase() as TransportRole;
	if (!ROLES.includes(role)) throw new Error(`unknown Transport role "${t['@_role'] ?? ''}"`);
	const meta = t.Meta as Record<string, unknown> | undefined;
	return {
		role,
		origin: text(t.Origin),
		response: text(t.Response),
		timestamp: text(t.TimeStamp),
		result: meta && typeof meta === 'object' ? text(meta.Result) : null
	};
}

/**
 * The local name of the root element ("VOEvent", "Transport", …) read from the first bytes
 * without parsing, skipping the XML declaration, comments and processing instructions.
 */
export function rootElementName(xml: string): string | null {
	let i = 0;
	const n = Math.min(xml.length, 8192);
	while (i < n) {
		const lt = xml.indexOf('<', i);
		if (lt < 0 || lt >= n) return null;
		if (xml.startsWith('<?', lt)) {
			const end = xml.indexOf('?>', lt + 2);
			if (end < 0) return null;
			i = end + 2;
		} else if (xml.startsWith('<!--', lt)) {
			const end = xml.indexOf('-->', lt + 4);
			if (end < 0) return null;
			i = end + 3;
		} else if (xml.startsWith('<!', lt)) {
			const end = xml.indexOf('>', lt + 2);
			if (end < 0) return null;
			i = end + 1;
		} else {
			const m = /^<([A-Za-z_][\w.-]*:)?([A-Za-z_][\w.-]*)/.exec(xml.slice(lt, lt + 200));
			return m ? m[2] : null;
		}
	}
	return null;
}

export type MessageKind = 'transport' | 'voevent' | 'unknown';

/** Classify a received payload by its root element. */
export function messageKind(xml: string): MessageKind {
	const root = rootElementName(xml);
	if (root === 'Transport') return 'transport';
	if (root === 'VOEvent') return 'voevent';
	return 'unknown';
}
