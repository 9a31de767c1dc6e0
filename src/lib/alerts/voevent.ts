/**
 * VOEvent 2.0 (IVOA Recommendation, 2011) → a checked gravitational-wave notice.
 *
 * Pure: no I/O. The Param names we read, their accepted alternative spellings and units are
 * documented in docs/notice-format.md; keep that file in step with the tables below.
 *
 * Hostile input is expected (a broker relays XML written by others), so the raw text is checked
 * for size and for DOCTYPE/ENTITY declarations before any parser sees it, entity expansion is off
 * in the parser, and only the five predefined XML entities and numeric character references are
 * decoded, by hand.
 */
import { XMLParser, XMLValidator } from 'fast-xml-parser';
import { z } from 'zod';

/** Default largest notice accepted, in bytes. Real notices are a few kB; 1 MiB leaves room. */
export const DEFAULT_MAX_NOTICE_BYTES = 1024 * 1024;

/** Seconds in a Julian year (IAU: 365.25 d × 86400 s), the year used for FAR conversions. */
export const SECONDS_PER_JULIAN_YEAR = 365.25 * 86400;

/**
 * `followup` is a notice that cites an earlier one with `cite="followup"` and states no kind of its
 * own: a new, independent measurement about the same event (VOEvent 2.0 §3.7.1), kept beside the
 * event's content rather than replacing it.
 */
export const NOTICE_KINDS = ['preliminary', 'initial', 'update', 'retraction', 'followup'] as const;
export const NOTICE_ROLES = ['observation', 'test', 'utility'] as const;
export const CITE_TYPES = ['followup', 'supersedes', 'retraction'] as const;

export type NoticeKind = (typeof NOTICE_KINDS)[number];
export type NoticeRole = (typeof NOTICE_ROLES)[number];
export type CiteType = (typeof CITE_TYPES)[number];

/** One-line error raised for any notice we refuse. */
export class NoticeParseError extends Error {
	override name = 'NoticeParseError';
}

/**
 * The notice names its event only through the packets it cites, and none of them is known (yet):
 * it may be read once one of them has arrived. `waitingFor` lists the cited IVORNs.
 */
export class NoticeWaitError extends NoticeParseError {
	override name = 'NoticeWaitError';
	constructor(
		message: string,
		readonly waitingFor: string[]
	) {
		super(message);
	}
}

/** Longest retraction reason kept (longer text is cut at a word and marked with an ellipsis). */
export const MAX_REASON_CHARS = 500;

const probability = z.number().finite().min(0).max(1);
const ivornSchema = z
	.string()
	.min(7)
	.max(512)
	.regex(/^ivo:\/\/[^\s]+$/, 'must be an ivo:// identifier without spaces');
const isoUtc = z.string().regex(/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z$/, 'must be ISO-8601 UTC');

export const classificationSchema = z.object({
	BNS: probability.nullable(),
	NSBH: probability.nullable(),
	BBH: probability.nullable(),
	Terrestrial: probability.nullable()
});

export const propertiesSchema = z.object({
	HasNS: probability.nullable(),
	HasRemnant: probability.nullable(),
	HasMassGap: probability.nullable()
});

export const noticeSchema = z.object({
	ivorn: ivornSchema,
	role: z.enum(NOTICE_ROLES),
	authoredAt: isoUtc,
	eventTime: isoUtc.nullable(),
	kind: z.enum(NOTICE_KINDS),
	sourceEventId: z
		.string()
		.min(1)
		.max(128)
		.regex(/^[A-Za-z0-9][A-Za-z0-9_.:\-]*$/, 'must be letters, digits and _.:-'),
	/** False-alarm rate in Hz (events per second). */
	far: z.number().finite().nonnegative().nullable(),
	classification: classificationSchema.nullable(),
	properties: propertiesSchema.nullable(),
	skymapUrl: z
		.string()
		.max(2048)
		.regex(/^https?:\/\/[^\s]+$/, 'must be an http(s) URL')
		.nullable(),
	citations: z.array(z.object({ ivorn: ivornSchema, cite: z.enum(CITE_TYPES) })).max(64),
	/** A retraction's stated reason, when the notice gives one (absent otherwise). */
	reason: z.string().min(1).max(MAX_REASON_CHARS).optional(),
	/** The sender's own significance flag, when the notice gives one (JSON notices do). */
	significant: z.boolean().optional(),
	/** Detectors that saw the event ("H1", "L1" …), when the notice names them (JSON notices do). */
	instruments: z.array(z.string().min(1).max(16)).max(16).optional()
});

export type Notice = z.infer<typeof noticeSchema>;
export type Classification = z.infer<typeof classificationSchema>;
export type NoticeProperties = z.infer<typeof propertiesSchema>;

/** FAR in Hz → events per Julian year. */
export function farHzToPerYear(farHz: number): number {
	return farHz * SECONDS_PER_JULIAN_YEAR;
}

/** Events per Julian year → FAR in Hz. */
export function farPerYearToHz(perYear: number): number {
	return perYear / SECONDS_PER_JULIAN_YEAR;
}

// ---------------------------------------------------------------------------------------------
// Param name tables. Names are compared after lower-casing and dropping spaces, '_', '-' and '.',
// so "Source_Event_ID" and "sourceeventid" both match "SourceEventId".

/** Normalised form used for every name comparison. */
export function normaliseName(name: string): string {
	return name.toLowerCase().replace(/[\s_\-.]/g, '');
}

export const PARAM_NAMES = {
	sourceEventId: ['SourceEventId', 'EventId', 'SourceId', 'EventName', 'TriggerId'],
	kind: ['NoticeKind', 'Kind', 'NoticeType', 'AlertKind', 'AlertType'],
	far: ['FalseAlarmRate', 'FAR', 'FalseAlarmRateHz'],
	skymapUrl: ['SkymapUrl', 'SkymapUri', 'SkymapFits', 'SkymapFile', 'Skymap', 'MapUrl'],
	classificationGroup: ['Classification', 'SourceClassification'],
	propertiesGroup: ['Properties', 'SourceProperties'],
	BNS: ['BNS', 'ProbBNS'],
	NSBH: ['NSBH', 'ProbNSBH'],
	BBH: ['BBH', 'ProbBBH'],
	Terrestrial: ['Terrestrial', 'ProbTerrestrial', 'Terr', 'Noise'],
	HasNS: ['HasNS', 'HasNeutronStar', 'ProbHasNS'],
	HasRemnant: ['HasRemnant', 'ProbHasRemnant'],
	HasMassGap: ['HasMassGap', 'ProbHasMassGap'],
	reason: ['Reason', 'RetractionReason', 'RetractReason', 'RetractionComment']
} as const;

const KIND_ALIASES: Record<string, NoticeKind> = {
	preliminary: 'preliminary',
	initial: 'initial',
	update: 'update',
	retraction: 'retraction',
	retracted: 'retraction',
	retract: 'retraction',
	followup: 'followup'
};

// ---------------------------------------------------------------------------------------------
// A stream's vocabulary: which Params carry which field. Streams are told apart by the part of
// the IVORN before "#" (VOEvent 2.0 §2.2: "the event identifier also expresses the stream
// identifier"); each may name its Params its own way. The default is PARAM_NAMES above.

/** The fields whose Param (or Group) names a stream may set. */
export const VOCABULARY_FIELDS = [
	'sourceEventId',
	'kind',
	'far',
	'skymapUrl',
	'classificationGroup',
	'BNS',
	'NSBH',
	'BBH',
	'Terrestrial',
	'propertiesGroup',
	'HasNS',
	'HasRemnant',
	'HasMassGap'
] as const;
export type VocabularyField = (typeof VOCABULARY_FIELDS)[number];

/** The unit a stream's false-alarm rate is in when its Param carries no `unit` attribute. */
export const FAR_DEFAULT_UNITS = ['Hz', 'per-year'] as const;
export type FarDefaultUnit = (typeof FAR_DEFAULT_UNITS)[number];

export interface NoticeVocabulary {
	/** Accepted Param (or Group) names per field; the first is the one we write. */
	names: Record<VocabularyField, string[]>;
	/** Unit of the false-alarm rate when the Param states none (a stated `unit` still wins). */
	farUnit: FarDefaultUnit;
	/**
	 * A regular expression with exactly one capture group, applied to the local part of an IVORN
	 * (after "#"): the event id when no Param names it and no cited packet is known. Null: no rule.
	 */
	eventIdFromIvorn: string | null;
}

export const DEFAULT_VOCABULARY: NoticeVocabulary = Object.freeze({
	names: Object.fromEntries(VOCABULARY_FIELDS.map((f) => [f, [...PARAM_NAMES[f]]])) as Record<VocabularyField, string[]>,
	farUnit: 'Hz',
	eventIdFromIvorn: null
});

/** Longest event-id rule accepted (the rule runs on IVORNs of at most 512 characters). */
export const MAX_EVENT_ID_RULE_CHARS = 200;

const paramNameSchema = z
	.string()
	.trim()
	.min(1, 'A name may not be empty.')
	.max(64, 'A name may be at most 64 characters.')
	.regex(/^[A-Za-z0-9][A-Za-z0-9 _.:\-]*$/, 'A name may hold letters, digits, spaces and _ . : - only.');

/** How many capture groups a regular expression has (it matches "" with one extra empty alternative). */
function captureGroups(source: string): number {
	return new RegExp(`${source}|`).exec('')!.length - 1;
}

export const vocabularySchema = z.object({
	names: z.object(
		Object.fromEntries(
			VOCABULARY_FIELDS.map((f) => [f, z.array(paramNameSchema).min(1, 'Give at least one name.').max(16, 'Give at most 16 names.')])
		) as Record<VocabularyField, z.ZodArray<typeof paramNameSchema>>
	),
	farUnit: z.enum(FAR_DEFAULT_UNITS),
	eventIdFromIvorn: z
		.string()
		.trim()
		.max(MAX_EVENT_ID_RULE_CHARS, `The rule may be at most ${MAX_EVENT_ID_RULE_CHARS} characters.`)
		.superRefine((source, ctx) => {
			let groups: number;
			try {
				groups = captureGroups(source);
			} catch (e) {
				ctx.addIssue({ code: 'custom', message: `This is not a regular expression: ${(e as Error).message}` });
				return;
			}
			if (groups !== 1) ctx.addIssue({ code: 'custom', message: `The rule needs exactly one capture group ( … ); it has ${groups}.` });
		})
		.nullable()
});

/** The stream of an IVORN: everything before "#" (VOEvent 2.0 §2.2), or the whole IVORN without one. */
export function streamOf(ivorn: string): string {
	const hash = ivorn.indexOf('#');
	return hash < 0 ? ivorn : ivorn.slice(0, hash);
}

/** The local part of an IVORN: what follows "#" (empty without one). */
export function localPartOf(ivorn: string): string {
	const hash = ivorn.indexOf('#');
	return hash < 0 ? '' : ivorn.slice(hash + 1);
}

/** FAR units we convert to Hz (normalised: lower case, no spaces). */
const FAR_UNITS_TO_HZ: Record<string, number> = {
	hz: 1,
	's-1': 1,
	's^-1': 1,
	'1/s': 1,
	'/s': 1,
	'yr-1': 1 / SECONDS_PER_JULIAN_YEAR,
	'yr^-1': 1 / SECONDS_PER_JULIAN_YEAR,
	'1/yr': 1 / SECONDS_PER_JULIAN_YEAR,
	'/yr': 1 / SECONDS_PER_JULIAN_YEAR,
	'a-1': 1 / SECONDS_PER_JULIAN_YEAR,
	peryear: 1 / SECONDS_PER_JULIAN_YEAR
};

// ---------------------------------------------------------------------------------------------

export interface ParseOptions {
	/** Largest input accepted, in bytes (UTF-8). */
	maxBytes?: number;
	/** The stream's vocabulary (default: {@link DEFAULT_VOCABULARY}). */
	vocabulary?: NoticeVocabulary;
	/**
	 * The event (source event id) a cited packet belongs to, when that packet is known; ingestion
	 * looks the IVORN up among stored notices. Without it, cited packets are never known.
	 */
	citedEvent?: (ivorn: string) => string | null;
}

/** Where a notice's event id came from. */
export type EventIdSource = 'param' | 'citation' | 'ivorn';

export interface NoticeReading {
	notice: Notice;
	/** The stream the notice belongs to (its IVORN before "#"). */
	stream: string;
	eventIdFrom: EventIdSource;
}

type XNode = Record<string, unknown>;

interface RawParam {
	name: string;
	value: string;
	unit: string | null;
	group: string | null;
}

const CDATA_KEY = '#cdata';
const TEXT_KEY = '#text';
const ATTR = '@_';

function fail(message: string): never {
	throw new NoticeParseError(message.replace(/\s*\n\s*/g, ' '));
}

/** Decode the five predefined XML entities and numeric character references; refuse others. */
export function decodeXmlEntities(text: string): string {
	if (!text.includes('&')) return text;
	return text.replace(/&(#x[0-9a-fA-F]{1,6}|#[0-9]{1,7}|[A-Za-z][A-Za-z0-9]*);?/g, (whole, ref: string) => {
		if (!whole.endsWith(';')) fail(`bare "&" in text near "${whole.slice(0, 12)}"`);
		if (ref[0] === '#') {
			const code = ref[1] === 'x' ? parseInt(ref.slice(2), 16) : parseInt(ref.slice(1), 10);
			if (!Number.isFinite(code) || code > 0x10ffff || code === 0) fail(`bad character reference "${whole}"`);
			return String.fromCodePoint(code);
		}
		switch (ref) {
			case 'lt':
				return '<';
			case 'gt':
				return '>';
			case 'amp':
				return '&';
			case 'quot':
				return '"';
			case 'apos':
				return "'";
			default:
				return fail(`undefined entity "&${ref};" (only the predefined XML entities are accepted)`);
		}
	});
}

function asArray<T>(x: T | T[] | undefined | null): T[] {
	if (x === undefined || x === null) return [];
	return Array.isArray(x) ? x : [x];
}

function isNode(x: unknown): x is XNode {
	return typeof x === 'object' && x !== null && !Array.isArray(x);
}

/** Text content of an element: decoded text plus CDATA (CDATA is taken literally). */
function textOf(node: unknown): string {
	if (node === undefined || node === null) return '';
	if (typeof node === 'string' || typeof node === 'number' || typeof node === 'boolean') {
		return decodeXmlEntities(String(node)).trim();
	}
	if (Array.isArray(node)) return textOf(node[0]);
	if (!isNode(node)) return '';
	const text = node[TEXT_KEY] === undefined ? '' : decodeXmlEntities(String(node[TEXT_KEY]));
	const cdata = asArray(node[CDATA_KEY] as unknown).map(String).join('');
	return (text + cdata).trim();
}

function attr(node: unknown, name: string): string | null {
	if (!isNode(node)) return null;
	const v = node[ATTR + name];
	return v === undefined || v === null ? null : decodeXmlEntities(String(v)).trim();
}

function child(node: unknown, name: string): unknown {
	return isNode(node) ? node[name] : undefined;
}

/** Collect every Param under `node`, recursing into Groups (any depth). */
function collectParams(node: unknown, group: string | null, out: RawParam[]): void {
	for (const p of asArray(child(node, 'Param') as unknown)) {
		const name = attr(p, 'name');
		if (!name) continue;
		let value = attr(p, 'value');
		if (value === null) {
			const v = child(p, 'Value');
			value = v === undefined ? '' : textOf(v);
		}
		out.push({ name, value, unit: attr(p, 'unit'), group });
	}
	for (const g of asArray(child(node, 'Group') as unknown)) {
		const gName = attr(g, 'name') ?? attr(g, 'type');
		const gType = attr(g, 'type');
		// A group is known by its name or its type; a nested group also keeps its ancestors'
		// labels, so a Param two groups down inside "Classification" still counts as one.
		const label = [group, gName, gType].filter(Boolean).join('|') || null;
		collectParams(g, label, out);
	}
}

function groupMatches(label: string | null, names: readonly string[]): boolean {
	if (!label) return false;
	const wanted = new Set(names.map(normaliseName));
	return label.split('|').some((l) => wanted.has(normaliseName(l)));
}

/** The one value of a logical field; conflicting duplicates are refused. */
function pick(
	params: RawParam[],
	names: readonly string[],
	filter: (p: RawParam) => boolean = () => true
): RawParam | null {
	const wanted = new Set(names.map(normaliseName));
	const hits = params.filter((p) => wanted.has(normaliseName(p.name)) && filter(p));
	if (hits.length === 0) return null;
	const first = hits[0];
	for (const h of hits.slice(1)) {
		if (h.value !== first.value) {
			fail(`conflicting values for Param ${names[0]}: "${first.value}" and "${h.value}"`);
		}
	}
	return first;
}

function parseNumber(p: RawParam, field: string): number {
	const s = p.value.trim();
	// Number('') is 0 and Number('0x10') is 16; accept only decimal notation.
	if (!/^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/.test(s)) {
		fail(`Param ${p.name} (${field}) is not a number: "${s.slice(0, 40)}"`);
	}
	return Number(s);
}

function parseProbability(p: RawParam | null, field: string): number | null {
	if (!p) return null;
	const v = parseNumber(p, field);
	if (v < 0 || v > 1) fail(`Param ${p.name} (${field}) must lie in [0, 1], got ${v}`);
	return v;
}

const ISO_RE = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2}):(\d{2})(\.\d+)?(Z|[+-]\d{2}:?\d{2})?$/;

/**
 * ISO-8601 date-time → canonical UTC string. VOEvent 2.0 times without a zone are UTC
 * (the Recommendation's default time scale for Who/Date and ISOTime; from memory).
 */
export function normaliseIsoTime(value: string, field: string): string {
	const s = value.trim();
	const m = ISO_RE.exec(s);
	if (!m) fail(`${field} is not an ISO-8601 date-time: "${s.slice(0, 40)}"`);
	let zone = m[8] ?? 'Z';
	if (/^[+-]\d{4}$/.test(zone)) zone = `${zone.slice(0, 3)}:${zone.slice(3)}`;
	const frac = m[7] ? m[7].slice(0, 4).padEnd(4, '0') : '.000';
	const t = Date.parse(`${m[1]}-${m[2]}-${m[3]}T${m[4]}:${m[5]}:${m[6]}${frac}${zone}`);
	if (!Number.isFinite(t)) fail(`${field} is not a valid date-time: "${s}"`);
	return new Date(t).toISOString();
}

/** First ISOTime found anywhere under WhereWhen (depth-first). */
function findIsoTime(node: unknown, depth = 0): string | null {
	if (depth > 16 || !isNode(node)) return null;
	if ('ISOTime' in node) {
		const t = textOf(node.ISOTime);
		if (t) return t;
	}
	for (const [k, v] of Object.entries(node)) {
		if (k.startsWith(ATTR) || k === TEXT_KEY) continue;
		for (const item of asArray(v as unknown)) {
			const t = findIsoTime(item, depth + 1);
			if (t) return t;
		}
	}
	return null;
}

function byteLength(input: string | Uint8Array): number {
	return typeof input === 'string' ? Buffer.byteLength(input, 'utf8') : input.byteLength;
}

/**
 * Cheap checks on the raw text that must run before any parser: size, DOCTYPE, ENTITY.
 * Exported so the listener and the inbox can refuse early with the same reasons.
 */
export function precheckXml(input: string | Uint8Array, opts: ParseOptions = {}): string {
	const maxBytes = opts.maxBytes ?? DEFAULT_MAX_NOTICE_BYTES;
	const size = byteLength(input);
	if (size > maxBytes) fail(`notice is ${size} bytes, larger than the ${maxBytes}-byte limit`);
	const xml = typeof input === 'string' ? input : new TextDecoder('utf-8', { fatal: false }).decode(input);
	if (xml.trim() === '') fail('notice is empty');
	if (/<!DOCTYPE/i.test(xml)) fail('DOCTYPE declarations are refused');
	if (/<!ENTITY/i.test(xml)) fail('ENTITY declarations are refused');
	return xml.charCodeAt(0) === 0xfeff ? xml.slice(1) : xml;
}

const parser = new XMLParser({
	ignoreAttributes: false,
	attributeNamePrefix: ATTR,
	removeNSPrefix: true,
	parseTagValue: false,
	parseAttributeValue: false,
	trimValues: true,
	cdataPropName: CDATA_KEY,
	textNodeName: TEXT_KEY,
	processEntities: false,
	htmlEntities: false,
	ignoreDeclaration: true,
	ignorePiTags: true
});

/**
 * Parse VOEvent 2.0 XML into a {@link Notice}. Throws {@link NoticeParseError} with a one-line
 * reason for anything refused ({@link NoticeWaitError} when only a cited packet could name the event).
 */
export function parseVoevent(input: string | Uint8Array, opts: ParseOptions = {}): Notice {
	return readVoevent(input, opts).notice;
}

/** {@link parseVoevent}, also saying which stream the notice is from and where its event id came from. */
export function readVoevent(input: string | Uint8Array, opts: ParseOptions = {}): NoticeReading {
	const vocabulary = opts.vocabulary ?? DEFAULT_VOCABULARY;
	const names = vocabulary.names;
	const xml = precheckXml(input, opts);
	const valid = XMLValidator.validate(xml, { allowBooleanAttributes: false });
	if (valid !== true) {
		const e = valid.err;
		fail(`malformed XML at line ${e.line}, column ${e.col}: ${e.msg}`);
	}
	let doc: XNode;
	try {
		doc = parser.parse(xml) as XNode;
	} catch (e) {
		fail(`malformed XML: ${(e as Error).message}`);
	}
	const roots = Object.keys(doc).filter((k) => !k.startsWith('?') && k !== TEXT_KEY && k !== CDATA_KEY);
	if (roots.length !== 1 || roots[0] !== 'VOEvent') {
		fail(`root element is ${roots.length ? `"${roots.join(', ')}"` : 'missing'}, not VOEvent`);
	}
	const root = doc.VOEvent;
	if (!isNode(root)) fail('VOEvent element is empty');

	const version = attr(root, 'version');
	if (version !== null && !version.startsWith('2.')) fail(`unsupported VOEvent version "${version}" (2.0 expected)`);

	const ivorn = attr(root, 'ivorn');
	if (!ivorn) fail('VOEvent has no ivorn attribute');
	// VOEvent 2.0 §3.1.2: role is optional and "observation" when missing.
	const roleRaw = attr(root, 'role') || 'observation';
	const role = roleRaw.toLowerCase();
	if (!(NOTICE_ROLES as readonly string[]).includes(role)) {
		fail(`unsupported role "${roleRaw}" (expected observation, test or utility)`);
	}

	const dateText = textOf(child(child(root, 'Who'), 'Date'));
	if (!dateText) fail('missing Who/Date (the time the notice was authored)');
	const authoredAt = normaliseIsoTime(dateText, 'Who/Date');

	const params: RawParam[] = [];
	collectParams(child(root, 'What'), null, params);

	const citations: { ivorn: string; cite: CiteType }[] = [];
	for (const c of asArray(child(child(root, 'Citations'), 'EventIVORN') as unknown)) {
		const target = textOf(c);
		const cite = (attr(c, 'cite') ?? '').toLowerCase();
		if (!target) fail('empty Citations/EventIVORN');
		if (!(CITE_TYPES as readonly string[]).includes(cite)) {
			fail(`Citations/EventIVORN cite="${cite}" is not followup, supersedes or retraction`);
		}
		citations.push({ ivorn: target, cite: cite as CiteType });
	}

	const event = eventIdOf(ivorn, pick(params, names.sourceEventId), citations, vocabulary, opts.citedEvent);

	// A kind Param wins; else the citations say (VOEvent 2.0 §3.7: none = a new discovery,
	// §3.7.1: supersedes, followup, retraction). A retraction citation outranks the others.
	const kindParam = pick(params, names.kind);
	let kind: NoticeKind;
	if (kindParam && kindParam.value) {
		const k = KIND_ALIASES[normaliseName(kindParam.value)];
		if (!k) fail(`Param ${kindParam.name} "${kindParam.value}" is not preliminary, initial, update, retraction or followup`);
		kind = k;
	} else if (citations.some((c) => c.cite === 'retraction')) {
		kind = 'retraction';
	} else if (citations.some((c) => c.cite === 'supersedes')) {
		kind = 'update';
	} else if (citations.some((c) => c.cite === 'followup')) {
		kind = 'followup';
	} else {
		// A new discovery with no stated kind: read as preliminary, the cautious reading (it shows "may be retracted or revised").
		kind = 'preliminary';
	}

	const farParam = pick(params, names.far);
	let far: number | null = null;
	if (farParam) {
		const unit = farParam.unit === null || farParam.unit.trim() === '' ? (vocabulary.farUnit === 'per-year' ? 'peryear' : 'hz') : normaliseUnit(farParam.unit);
		const factor = FAR_UNITS_TO_HZ[unit];
		if (factor === undefined) fail(`Param ${farParam.name} has unit "${farParam.unit}"; expected Hz or yr-1`);
		far = parseNumber(farParam, 'far') * factor;
		if (far < 0) fail(`Param ${farParam.name} (far) must not be negative`);
	}

	const urlParam = pick(params, names.skymapUrl);
	const skymapUrl = urlParam && urlParam.value ? urlParam.value : null;

	const inClass = (p: RawParam) => groupMatches(p.group, names.classificationGroup);
	const classProbe = (wanted: readonly string[]) =>
		pick(params, wanted, inClass) ?? pick(params, wanted.filter((n) => n.toLowerCase().startsWith('prob')));
	const classParams = {
		BNS: classProbe(names.BNS),
		NSBH: classProbe(names.NSBH),
		BBH: classProbe(names.BBH),
		Terrestrial: classProbe(names.Terrestrial)
	};
	let classification: Classification | null = null;
	if (Object.values(classParams).some(Boolean)) {
		classification = {
			BNS: parseProbability(classParams.BNS, 'BNS'),
			NSBH: parseProbability(classParams.NSBH, 'NSBH'),
			BBH: parseProbability(classParams.BBH, 'BBH'),
			Terrestrial: parseProbability(classParams.Terrestrial, 'Terrestrial')
		};
		const sum = Object.values(classification).reduce<number>((a, b) => a + (b ?? 0), 0);
		// Rounded probabilities in real notices can overshoot 1 by a few thousandths.
		if (sum > 1.01) fail(`classification probabilities sum to ${sum.toFixed(3)}, more than 1`);
	}

	const inProps = (p: RawParam) => groupMatches(p.group, names.propertiesGroup);
	const propProbe = (wanted: readonly string[]) => pick(params, wanted, inProps) ?? pick(params, wanted);
	const propParams = {
		HasNS: propProbe(names.HasNS),
		HasRemnant: propProbe(names.HasRemnant),
		HasMassGap: propProbe(names.HasMassGap)
	};
	let properties: NoticeProperties | null = null;
	if (Object.values(propParams).some(Boolean)) {
		properties = {
			HasNS: parseProbability(propParams.HasNS, 'HasNS'),
			HasRemnant: parseProbability(propParams.HasRemnant, 'HasRemnant'),
			HasMassGap: parseProbability(propParams.HasMassGap, 'HasMassGap')
		};
	}

	const timeText = findIsoTime(child(root, 'WhereWhen'));
	const eventTime = timeText ? normaliseIsoTime(timeText, 'WhereWhen ISOTime') : null;

	// A retraction needs only its identity; a follow-up adds what it has (VOEvent 2.0 §3.7.1).
	if (kind !== 'retraction' && kind !== 'followup') {
		if (!eventTime) fail(`${kind} notice has no WhereWhen ISOTime (event time)`);
		if (far === null) fail(`${kind} notice lacks required Param ${names.far.join(' / ')}`);
		if (!classification) fail(`${kind} notice lacks the Classification group (${[names.BNS[0], names.NSBH[0], names.BBH[0], names.Terrestrial[0]].join(', ')})`);
		if (!skymapUrl) fail(`${kind} notice lacks required Param ${names.skymapUrl.join(' / ')}`);
	}

	const reason = kind === 'retraction' ? retractionReason(root, params) : null;

	const candidate = {
		ivorn,
		role,
		authoredAt,
		eventTime,
		kind,
		sourceEventId: event.id,
		far,
		classification,
		properties,
		skymapUrl,
		citations,
		...(reason ? { reason } : {})
	};
	const checked = noticeSchema.safeParse(candidate);
	if (!checked.success) {
		const issue = checked.error.issues[0];
		fail(`invalid notice field ${issue.path.join('.') || '(root)'}: ${issue.message}`);
	}
	return { notice: checked.data, stream: streamOf(ivorn), eventIdFrom: event.from };
}

/**
 * The event a notice belongs to: its event-id Param when present; else the event of the packets
 * it cites, when known (all known ones must agree); else the stream's rule applied to the local
 * part of its own IVORN, or failing that of the first cited IVORN it matches. With none of these,
 * a notice whose cited packets are unknown waits for them ({@link NoticeWaitError}); one that
 * cites nothing is refused.
 */
function eventIdOf(
	ivorn: string,
	param: RawParam | null,
	citations: { ivorn: string; cite: CiteType }[],
	vocabulary: NoticeVocabulary,
	citedEvent: ParseOptions['citedEvent']
): { id: string; from: EventIdSource } {
	if (param && param.value) return { id: param.value, from: 'param' };
	const cited = [...new Set(citations.map((c) => c.ivorn))];
	const known = new Map<string, string>();
	for (const c of cited) {
		const id = citedEvent?.(c) ?? null;
		if (id) known.set(c, id);
	}
	const events = [...new Set(known.values())];
	if (events.length > 1) {
		fail(`the cited notices belong to different events (${[...known].map(([c, id]) => `${c} → ${id}`).join(', ')}); a notice may concern one event only`);
	}
	if (events.length === 1) return { id: events[0], from: 'citation' };
	if (vocabulary.eventIdFromIvorn) {
		let rule: RegExp;
		try {
			rule = new RegExp(vocabulary.eventIdFromIvorn);
		} catch {
			fail(`the stream's event-id rule /${vocabulary.eventIdFromIvorn}/ is not a regular expression`);
		}
		for (const candidate of [ivorn, ...cited]) {
			const m = rule.exec(localPartOf(candidate));
			if (m && m[1]) return { id: m[1], from: 'ivorn' };
		}
	}
	const wanted = `Param ${vocabulary.names.sourceEventId.join(' / ')}`;
	const rule = vocabulary.eventIdFromIvorn ? `the stream's rule /${vocabulary.eventIdFromIvorn}/ finds no event id in the IVORN` : "the stream states no rule for the IVORN's local part";
	if (cited.length) {
		throw new NoticeWaitError(
			`waiting for the cited notice${cited.length > 1 ? 's' : ''} ${cited.join(', ')}: the notice names its event only through ${cited.length > 1 ? 'them' : 'it'} (no ${wanted}, and ${rule}), and ${cited.length > 1 ? 'none is' : 'it is not'} stored yet`,
			cited
		);
	}
	fail(`missing required ${wanted} (and ${rule})`);
}

/**
 * Why a retraction was issued, in the sender's words: a Param named like **Reason**, else the
 * `Why/Description`, else a `Description` beside the citations (where the fake broker and some
 * senders put it). Whitespace is collapsed; an over-long text is cut at a word boundary.
 */
/** Text of an optional element; one we cannot decode is treated as absent rather than refusing the notice. */
function quietText(node: unknown): string {
	try {
		return textOf(node);
	} catch {
		return '';
	}
}

function retractionReason(root: XNode, params: RawParam[]): string | null {
	const texts = [
		// Not `pick`: two differing reason Params must not cost us the retraction itself.
		...params.filter((p) => (PARAM_NAMES.reason as readonly string[]).map(normaliseName).includes(normaliseName(p.name))).map((p) => p.value),
		...asArray(child(child(root, 'Why'), 'Description') as unknown).map(quietText),
		...asArray(child(child(root, 'Citations'), 'Description') as unknown).map(quietText)
	];
	const text = texts.map((t) => t.replace(/\s+/g, ' ').trim()).find((t) => t !== '');
	if (!text) return null;
	if (text.length <= MAX_REASON_CHARS) return text;
	const cut = text.slice(0, MAX_REASON_CHARS - 1);
	const space = cut.lastIndexOf(' ');
	return `${space > MAX_REASON_CHARS / 2 ? cut.slice(0, space) : cut}…`;
}

function normaliseUnit(unit: string | null): string {
	if (unit === null || unit.trim() === '') return 'hz';
	return unit.toLowerCase().replace(/\s+/g, '');
}

/** Short human summary of a notice, for the CLI and logs. */
export function describeNotice(n: Notice): string {
	const lines = [`${n.sourceEventId} ${n.kind} (${n.role}) ${n.ivorn}`, `  authored ${n.authoredAt}`];
	if (n.eventTime) lines.push(`  event time ${n.eventTime}`);
	if (n.far !== null) {
		const perYear = farHzToPerYear(n.far);
		lines.push(`  FAR ${n.far.toExponential(3)} Hz (${perYear < 1e-2 ? perYear.toExponential(2) : perYear.toFixed(3)} per year)`);
	}
	if (n.classification) {
		const c = n.classification;
		const f = (v: number | null) => (v === null ? '–' : v.toFixed(3));
		lines.push(`  classification BNS ${f(c.BNS)}  NSBH ${f(c.NSBH)}  BBH ${f(c.BBH)}  Terrestrial ${f(c.Terrestrial)}`);
	}
	if (n.properties) {
		const p = n.properties;
		const f = (v: number | null) => (v === null ? '–' : v.toFixed(3));
		lines.push(`  properties HasNS ${f(p.HasNS)}  HasRemnant ${f(p.HasRemnant)}  HasMassGap ${f(p.HasMassGap)}`);
	}
	if (n.skymapUrl) lines.push(`  sky map ${n.skymapUrl}`);
	for (const c of n.citations) lines.push(`  cites (${c.cite}) ${c.ivorn}`);
	if (n.reason) lines.push(`  reason ${n.reason}`);
	return lines.join('\n');
}

/**
 * The ivorn attribute of a VOEvent's root element, read without a full parse (for acks of
 * notices that may be malformed). Returns null when none is found in the first 4 kB.
 */
export function sniffIvorn(xml: string): string | null {
	const head = xml.slice(0, 4096);
	const m = /<(?:[A-Za-z_][\w.-]*:)?VOEvent\b[^>]*?\sivorn\s*=\s*(["'])([^"'<>]*)\1/.exec(head);
	if (!m) return null;
	try {
		return decodeXmlEntities(m[2]).trim();
	} catch {
		return m[2].trim();
	}
}
