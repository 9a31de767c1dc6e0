/**
 * JSON notices → the same checked {@link Notice} as parseVoevent, plus the sky map the notice
 * carries inside it (base64 FITS) as bytes.
 *
 * The layout follows the detector network's public JSON alert schema: top level `superevent_id`,
 * `alert_type`, `time_created`, `event` (null for a retraction), `external_coinc`, `urls`
 * (field names and alert types as in the schema's published Avro record "Alert"; the fields inside
 * `event` — `time`, `far`, `significant`, `instruments`, `classification`, `properties`,
 * `skymap` — from memory). docs/notice-format.md describes the fields we read and what we do
 * with each.
 *
 * Pure: no I/O. Hostile input is expected, so before anything is parsed the raw text is checked
 * for size and nesting depth; the embedded map's decoded size is worked out from its length
 * before it is decoded, and gzip is inflated under the same cap as a fetched map's.
 */
import { z } from 'zod';
import { gunzipCapped, FitsInflateLimitError } from '../sky/fits.ts';
import { DEFAULT_MAX_NOTICE_BYTES, NoticeParseError, noticeSchema, type Notice, type NoticeKind } from './voevent.ts';

/** Default largest embedded sky map, decoded, in bytes (the server passes SKYMAP_MAX_MB). */
export const DEFAULT_MAX_EMBEDDED_SKYMAP_BYTES = 64 * 1024 * 1024;
/** Default cap on an embedded gzip map's inflated size (the server passes SKYMAP_MAX_INFLATED_MB). */
export const DEFAULT_MAX_EMBEDDED_INFLATED_BYTES = 256 * 1024 * 1024;
/** Deepest nesting of objects and arrays accepted; the format needs 3 (alert → event → classification). */
export const MAX_JSON_DEPTH = 8;

/** Authority of the IVORN we give a JSON notice, which has none of its own (see {@link jsonNoticeIvorn}). */
export const JSON_NOTICE_AUTHORITY = 'ivo://json-notice';

export type NoticeFormat = 'voevent' | 'json';

export interface JsonNoticeOptions {
	/** Largest notice without its embedded map, bytes (the same limit as a VOEvent notice). */
	maxBytes?: number;
	/** Largest embedded map, decoded, bytes (the same limit as a fetched map). */
	maxSkymapBytes?: number;
	/** Largest inflated size of a gzip embedded map (the same cap as a fetched map). */
	maxInflatedBytes?: number;
}

export interface ReadJsonNotice {
	notice: Notice;
	/** The multi-order sky map the notice carries (FITS, maybe gzip), or null when it has none. */
	embeddedSkymap: Uint8Array | null;
}

function fail(message: string): never {
	throw new NoticeParseError(message);
}

function limits(o: JsonNoticeOptions) {
	return {
		maxBytes: o.maxBytes ?? DEFAULT_MAX_NOTICE_BYTES,
		maxSkymapBytes: o.maxSkymapBytes ?? DEFAULT_MAX_EMBEDDED_SKYMAP_BYTES,
		maxInflatedBytes: o.maxInflatedBytes ?? DEFAULT_MAX_EMBEDDED_INFLATED_BYTES
	};
}

/** Base64 characters needed for `bytes` bytes (RFC 4648 §4: 4 characters per 3 bytes, padded). */
export function base64Length(bytes: number): number {
	return Math.ceil(bytes / 3) * 4;
}

/** Largest JSON notice accepted as a whole: the notice limit plus its largest embedded map in base64. */
export function maxJsonNoticeBytes(o: JsonNoticeOptions = {}): number {
	const l = limits(o);
	return l.maxBytes + base64Length(l.maxSkymapBytes);
}

/** Which reader a notice's text needs: by its first character (after a byte-order mark and blanks). */
export function detectNoticeFormat(text: string): NoticeFormat | null {
	const m = /^\uFEFF?\s*([{<])/.exec(text.slice(0, 4096));
	if (!m) return null;
	return m[1] === '{' ? 'json' : 'voevent';
}

/**
 * Deepest nesting of `{`/`[` outside strings, stopping as soon as `limit` is passed. Run before
 * JSON.parse so that a document of a million brackets costs one linear scan, not a parser's stack.
 */
export function jsonDepthExceeds(text: string, limit: number): boolean {
	let depth = 0;
	let inString = false;
	for (let i = 0; i < text.length; i++) {
		const c = text.charCodeAt(i);
		if (inString) {
			if (c === 0x5c) i++; // backslash: skip the escaped character
			else if (c === 0x22) inString = false;
		} else if (c === 0x22) inString = true;
		else if (c === 0x7b || c === 0x5b) {
			if (++depth > limit) return true;
		} else if (c === 0x7d || c === 0x5d) depth--;
	}
	return false;
}

const ALERT_TYPES: Record<string, NoticeKind> = {
	// The schema's early-warning alerts (before the merger) are read as preliminary notices.
	earlywarning: 'preliminary',
	preliminary: 'preliminary',
	initial: 'initial',
	update: 'update',
	retraction: 'retraction'
};

/** Zod 4 refuses Infinity (a literal such as 1e999 parses to it) as "not a number"; say what it is. */
const numberError = (what: string) => (iss: { input?: unknown }) => (typeof iss.input === 'number' ? `must be a finite number${what}` : `must be a number${what}`);
const probability = z.number({ error: numberError('') }).min(0, 'must lie in [0, 1]').max(1, 'must lie in [0, 1]');
const isoText = z.string({ error: 'must be an ISO-8601 date-time string' }).max(64, 'is too long for a date-time');

const eventSchema = z.object({
	time: isoText,
	far: z.number({ error: numberError(' (Hz)') }).min(0, 'must not be negative'),
	significant: z.boolean({ error: 'must be true or false' }),
	instruments: z.array(z.string().min(1).max(16).regex(/^[A-Za-z0-9]+$/, 'must be a detector code such as H1'), { error: 'must be a list of detector codes' }).min(1).max(16),
	classification: z.object({ BNS: probability, NSBH: probability, BBH: probability, Terrestrial: probability }, { error: 'must be an object of probabilities' }).partial(),
	properties: z
		.object({ HasNS: probability, HasRemnant: probability, HasMassGap: probability }, { error: 'must be an object of probabilities' })
		.partial()
		.nullish(),
	skymap: z.string({ error: 'must be the sky map as a base64 string' }).nullish()
});

const alertSchema = z.object({
	superevent_id: z.string({ error: 'is required (the event id)' }).min(1, 'is empty').max(128, 'is longer than 128 characters'),
	alert_type: z.string({ error: 'is required (PRELIMINARY, INITIAL, UPDATE or RETRACTION)' }).max(32),
	time_created: isoText,
	event: z.unknown().optional()
});

const ISO_RE = /^(\d{4})-(\d{2})-(\d{2})[T ](\d{2}):(\d{2}):(\d{2})(\.\d+)?(Z|[+-]\d{2}:?\d{2})?$/;

/** ISO-8601 date-time → canonical UTC (a time without a zone is UTC, as in the VOEvent reader). */
function isoUtc(value: string, field: string): string {
	const m = ISO_RE.exec(value.trim());
	if (!m) fail(`${field} is not an ISO-8601 date-time: "${value.slice(0, 40)}"`);
	let zone = m[8] ?? 'Z';
	if (/^[+-]\d{4}$/.test(zone)) zone = `${zone.slice(0, 3)}:${zone.slice(3)}`;
	const frac = m[7] ? m[7].slice(0, 4).padEnd(4, '0') : '.000';
	const t = Date.parse(`${m[1]}-${m[2]}-${m[3]}T${m[4]}:${m[5]}:${m[6]}${frac}${zone}`);
	if (!Number.isFinite(t)) fail(`${field} is not a valid date-time: "${value.slice(0, 40)}"`);
	return new Date(t).toISOString();
}

function kindOf(alertType: string): NoticeKind {
	const k = ALERT_TYPES[alertType.toLowerCase().replace(/[\s_-]/g, '')];
	if (!k) fail(`alert_type "${alertType.slice(0, 32)}" is not PRELIMINARY, INITIAL, UPDATE or RETRACTION`);
	return k;
}

/**
 * The IVORN a JSON notice is known by. The format has no IVORN, so one is made from what names a
 * notice in it — event, alert type and creation time — so that a resend of the same notice is a
 * repeat and every other notice is new.
 */
export function jsonNoticeIvorn(supereventId: string, kind: NoticeKind, createdAt: string): string {
	return `${JSON_NOTICE_AUTHORITY}/${encodeURIComponent(supereventId)}#${kind}-${createdAt}`;
}

/**
 * The inbox key of a JSON notice without reading it fully (it may be malformed): its IVORN, or
 * null when the three naming fields cannot be read. Give it text already checked for size.
 */
export function sniffJsonNoticeIvorn(text: string): string | null {
	if (jsonDepthExceeds(text, MAX_JSON_DEPTH)) return null;
	try {
		const doc = alertSchema.safeParse(JSON.parse(text.charCodeAt(0) === 0xfeff ? text.slice(1) : text));
		if (!doc.success) return null;
		return jsonNoticeIvorn(doc.data.superevent_id, kindOf(doc.data.alert_type), isoUtc(doc.data.time_created, 'time_created'));
	} catch {
		return null;
	}
}

function issueText(error: z.ZodError, prefix: string): string {
	const issue = error.issues[0];
	const path = [prefix, ...issue.path.map(String)].filter(Boolean).join('.');
	return `${path || 'the notice'} ${issue.message}`;
}

const MIB = 1024 * 1024;
function inMiB(bytes: number): string {
	return bytes >= MIB ? `${Math.round(bytes / MIB)} MiB` : `${bytes} bytes`;
}

/** Decode the embedded map under the size limits, refusing anything that is not FITS or gzip. */
function decodeSkymap(b64: string, l: ReturnType<typeof limits>): Uint8Array {
	const text = /\s/.test(b64) ? b64.replace(/\s+/g, '') : b64;
	if (text.length === 0) fail('event.skymap is empty');
	// Size from the length alone, before a byte is decoded.
	const padding = text.endsWith('==') ? 2 : text.endsWith('=') ? 1 : 0;
	const decodedBytes = (text.length / 4) * 3 - padding;
	if (decodedBytes > l.maxSkymapBytes) {
		fail(`the sky map inside the notice is ${inMiB(decodedBytes)}, over the ${inMiB(l.maxSkymapBytes)} limit for a sky map`);
	}
	if (text.length % 4 !== 0 || !/^[A-Za-z0-9+/]*={0,2}$/.test(text)) fail('event.skymap is not base64 (RFC 4648)');
	const bytes = new Uint8Array(Buffer.from(text, 'base64'));
	const gzip = bytes[0] === 0x1f && bytes[1] === 0x8b;
	const fits = new TextDecoder('latin1').decode(bytes.subarray(0, 9)) === 'SIMPLE  =';
	if (!gzip && !fits) fail('the sky map inside the notice is neither a FITS file nor gzip');
	if (gzip) {
		try {
			gunzipCapped(bytes, l.maxInflatedBytes);
		} catch (e) {
			if (e instanceof FitsInflateLimitError) {
				fail(`the sky map inside the notice unpacks to more than ${inMiB(l.maxInflatedBytes)}, the limit for a sky map`);
			}
			fail(`the sky map inside the notice is damaged gzip: ${(e as Error).message}`);
		}
	}
	return bytes;
}

/**
 * Read one JSON notice. Throws {@link NoticeParseError} with a one-line reason in plain words for
 * anything refused; the reason names the field at fault.
 */
export function parseJsonNotice(input: string | Uint8Array, opts: JsonNoticeOptions = {}): ReadJsonNotice {
	const l = limits(opts);
	const total = typeof input === 'string' ? Buffer.byteLength(input, 'utf8') : input.byteLength;
	const maxTotal = l.maxBytes + base64Length(l.maxSkymapBytes);
	if (total > maxTotal) fail(`notice is ${total} bytes, larger than the ${maxTotal}-byte limit (${l.maxBytes} bytes plus a sky map of at most ${inMiB(l.maxSkymapBytes)} in base64)`);
	let text = typeof input === 'string' ? input : new TextDecoder('utf-8').decode(input);
	if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
	if (text.trim() === '') fail('notice is empty');
	if (!text.trimStart().startsWith('{')) fail('notice is not a JSON object (it should start with "{")');
	if (jsonDepthExceeds(text, MAX_JSON_DEPTH)) fail(`notice nests objects or arrays deeper than ${MAX_JSON_DEPTH} levels; refused`);

	let doc: unknown;
	try {
		doc = JSON.parse(text);
	} catch (e) {
		fail(`notice is not valid JSON: ${(e as Error).message}`);
	}
	const top = alertSchema.safeParse(doc);
	if (!top.success) fail(issueText(top.error, ''));
	const { superevent_id: sourceEventId, alert_type, time_created } = top.data;
	const kind = kindOf(alert_type);
	const authoredAt = isoUtc(time_created, 'time_created');

	const rawEvent = top.data.event ?? null;
	if (kind === 'retraction' && rawEvent !== null) fail('a RETRACTION carries no event object (event must be null)');
	if (kind !== 'retraction' && rawEvent === null) fail(`a ${alert_type} notice needs its event object`);

	let embeddedSkymap: Uint8Array | null = null;
	let eventFields: Partial<Notice> = { eventTime: null, far: null, classification: null, properties: null };
	if (rawEvent !== null) {
		const ev = eventSchema.safeParse(rawEvent);
		if (!ev.success) fail(issueText(ev.error, 'event'));
		const e = ev.data;
		// The notice without its map must fit the notice limit, as a VOEvent does.
		const withoutMap = total - (e.skymap?.length ?? 0);
		if (withoutMap > l.maxBytes) fail(`notice is ${withoutMap} bytes without its sky map, larger than the ${l.maxBytes}-byte limit`);
		const c = e.classification;
		const classification = { BNS: c.BNS ?? null, NSBH: c.NSBH ?? null, BBH: c.BBH ?? null, Terrestrial: c.Terrestrial ?? null };
		if (Object.values(classification).every((v) => v === null)) fail('event.classification gives no probability (BNS, NSBH, BBH, Terrestrial)');
		const sum = Object.values(classification).reduce<number>((a, b) => a + (b ?? 0), 0);
		// Rounded probabilities can overshoot 1 by a few thousandths, as in the VOEvent reader.
		if (sum > 1.01) fail(`event.classification probabilities sum to ${sum.toFixed(3)}, more than 1`);
		const p = e.properties;
		eventFields = {
			eventTime: isoUtc(e.time, 'event.time'),
			far: e.far,
			classification,
			properties: p ? { HasNS: p.HasNS ?? null, HasRemnant: p.HasRemnant ?? null, HasMassGap: p.HasMassGap ?? null } : null,
			significant: e.significant,
			instruments: e.instruments
		};
		if (e.skymap) embeddedSkymap = decodeSkymap(e.skymap, l);
	} else if (total > l.maxBytes) {
		fail(`notice is ${total} bytes, larger than the ${l.maxBytes}-byte limit`);
	}

	const candidate = {
		ivorn: jsonNoticeIvorn(sourceEventId, kind, authoredAt),
		// The schema has no role; the network marks mock events with an "M" before the id (from memory).
		role: sourceEventId.startsWith('M') ? 'test' : 'observation',
		authoredAt,
		kind,
		sourceEventId,
		skymapUrl: null,
		citations: [],
		...eventFields
	};
	const checked = noticeSchema.safeParse(candidate);
	if (!checked.success) {
		const issue = checked.error.issues[0];
		const field = issue.path[0] === 'sourceEventId' ? 'superevent_id' : issue.path.join('.');
		fail(`invalid notice field ${field}: ${issue.message}`);
	}
	return { notice: checked.data, embeddedSkymap };
}

/**
 * Write a JSON notice in the layout {@link parseJsonNotice} reads (the fake broker, fixtures and
 * tests use it). `skymap` is embedded as base64.
 */
export function buildJsonNotice(n: {
	supereventId: string;
	kind: NoticeKind;
	createdAt: string;
	event: null | {
		time: string;
		farHz: number | null;
		significant: boolean;
		instruments: string[];
		classification: Partial<{ BNS: number; NSBH: number; BBH: number; Terrestrial: number }>;
		properties: { HasNS: number; HasRemnant: number; HasMassGap: number } | null;
		skymap: Uint8Array | null;
	};
}): string {
	const e = n.event;
	const doc = {
		alert_type: n.kind.toUpperCase(),
		time_created: n.createdAt,
		superevent_id: n.supereventId,
		urls: {},
		event: e && {
			time: e.time,
			far: e.farHz,
			significant: e.significant,
			instruments: e.instruments,
			classification: e.classification,
			properties: e.properties,
			...(e.skymap ? { skymap: Buffer.from(e.skymap.buffer, e.skymap.byteOffset, e.skymap.byteLength).toString('base64') } : {})
		},
		external_coinc: null
	};
	return JSON.stringify(doc, null, 1) + '\n';
}
