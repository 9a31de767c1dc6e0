import { readFileSync } from 'node:fs';
import { gzipSync } from 'node:zlib';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { analyseSkymap } from '../sky/index.ts';
import { parseVoevent, NoticeParseError } from './voevent.ts';
import {
	base64Length,
	detectNoticeFormat,
	jsonDepthExceeds,
	maxJsonNoticeBytes,
	parseJsonNotice,
	sniffJsonNoticeIvorn
} from './notice-json.ts';

const dir = fileURLToPath(new URL('../../../tests/fixtures/notices/', import.meta.url));
const raw = (name: string) => readFileSync(dir + name, 'utf8');
const fixture = (name: string) => JSON.parse(raw(`json/${name}`)) as Record<string, unknown> & { event: Record<string, unknown> | null };
const text = (doc: unknown) => JSON.stringify(doc);
/** astropy 5.2.1 / healpy 1.16.1 figures for the embedded map (tests/fixtures/notices/skymap-demo.astropy.json). */
const astropy = JSON.parse(raw('skymap-demo.astropy.json')).maps[0] as { area50Deg2: number; area90Deg2: number };

function refusal(input: string | Uint8Array, opts = {}): string {
	try {
		parseJsonNotice(input, opts);
	} catch (e) {
		expect(e).toBeInstanceOf(NoticeParseError);
		return (e as Error).message;
	}
	throw new Error('expected a refusal');
}

describe('JSON notices: the fixtures', () => {
	it('reads an initial notice with its embedded map into the same Notice as the VOEvent of the same story', () => {
		expect.hasAssertions();
		const { notice, embeddedSkymap } = parseJsonNotice(raw('json/bns-initial.json'));
		const xml = parseVoevent(raw('bns-initial.xml'));
		expect(notice).toEqual({
			...xml,
			ivorn: 'ivo://json-notice/SX30041207#initial-2030-04-12T08:02:00.000Z',
			// 0.0098 per year written in Hz: equal to the last bit or so.
			far: expect.closeTo(xml.far!, 24),
			skymapUrl: null,
			citations: [],
			properties: { ...xml.properties!, HasMassGap: 0 },
			significant: true,
			instruments: ['H1', 'L1', 'V1']
		});
		expect(notice.far! * 365.25 * 86400).toBeCloseTo(0.0098, 12);
		expect(Buffer.from(embeddedSkymap!).equals(readFileSync(dir + 'skymap-demo.multiorder.fits.gz'))).toBe(true);
	});

	it('the embedded map has the same 50% and 90% areas as the same map read as a file, and as astropy/healpy give', () => {
		expect.hasAssertions();
		const { embeddedSkymap } = parseJsonNotice(raw('json/bns-initial.json'));
		const embedded = analyseSkymap(embeddedSkymap!);
		const file = analyseSkymap(new Uint8Array(readFileSync(dir + 'skymap-demo.multiorder.fits.gz')));
		expect(embedded.area50).toBe(file.area50);
		expect(embedded.area90).toBe(file.area90);
		expect(embedded.area90 / astropy.area90Deg2).toBeCloseTo(1, 6);
		expect(embedded.area50 / astropy.area50Deg2).toBeCloseTo(1, 6);
	});

	it('reads an update without a map and a retraction without an event', () => {
		expect.hasAssertions();
		const update = parseJsonNotice(raw('json/bns-update.json'));
		expect(update.embeddedSkymap).toBeNull();
		expect(update.notice).toMatchObject({ kind: 'update', authoredAt: '2030-04-12T08:15:30.500Z', far: 1.2e-12, properties: null, skymapUrl: null });
		const retraction = parseJsonNotice(raw('json/retraction.json'));
		expect(retraction.embeddedSkymap).toBeNull();
		expect(retraction.notice).toEqual({
			ivorn: 'ivo://json-notice/SX30041315#retraction-2030-04-13T15:40:00.000Z',
			role: 'observation',
			authoredAt: '2030-04-13T15:40:00.000Z',
			eventTime: null,
			kind: 'retraction',
			sourceEventId: 'SX30041315',
			far: null,
			classification: null,
			properties: null,
			skymapUrl: null,
			citations: []
		});
	});

	it('a mock event id (M…) is a test notice', () => {
		expect.hasAssertions();
		expect(parseJsonNotice(raw('json/test-role.json')).notice).toMatchObject({ role: 'test', sourceEventId: 'MSXT0001', significant: false });
	});

	it('accepts alert types in any case, early warnings as preliminary, and a byte-order mark', () => {
		expect.hasAssertions();
		const doc = fixture('bns-update.json');
		expect(parseJsonNotice(text({ ...doc, alert_type: 'update' })).notice.kind).toBe('update');
		expect(parseJsonNotice(text({ ...doc, alert_type: 'EARLY_WARNING' })).notice.kind).toBe('preliminary');
		expect(parseJsonNotice('\uFEFF' + raw('json/bns-update.json')).notice.kind).toBe('update');
		expect(parseJsonNotice(new TextEncoder().encode(raw('json/bns-update.json'))).notice.kind).toBe('update');
	});

	it('names a notice by event, type and creation time: the same notice resent keeps its key', () => {
		expect.hasAssertions();
		expect(sniffJsonNoticeIvorn(raw('json/bns-initial.json'))).toBe(parseJsonNotice(raw('json/bns-initial.json')).notice.ivorn);
		expect(sniffJsonNoticeIvorn(text({ ...fixture('bns-update.json'), event: 'broken' }))).toBe('ivo://json-notice/SX30041207#update-2030-04-12T08:15:30.500Z');
		expect(sniffJsonNoticeIvorn('{"superevent_id": 1}')).toBeNull();
		expect(sniffJsonNoticeIvorn('not json')).toBeNull();
	});

	it('tells the formats apart by content', () => {
		expect.hasAssertions();
		expect(detectNoticeFormat(raw('json/retraction.json'))).toBe('json');
		expect(detectNoticeFormat('\uFEFF  \n' + raw('retraction.xml'))).toBe('voevent');
		expect(detectNoticeFormat('hello')).toBeNull();
		expect(detectNoticeFormat('')).toBeNull();
	});
});

describe('JSON notices: refusals in plain words', () => {
	it('refuses what is not JSON, not an object, or nested too deep (without parsing it)', () => {
		expect.hasAssertions();
		expect(refusal('')).toBe('notice is empty');
		expect(refusal('<VOEvent/>')).toMatch(/not a JSON object/);
		expect(refusal('{"superevent_id": "SX1",')).toMatch(/^notice is not valid JSON: /);
		expect(refusal('[1]')).toMatch(/not a JSON object/);
		const deep = '{"a":' + '['.repeat(1_000_000) + ']'.repeat(1_000_000) + '}';
		expect(refusal(deep)).toBe('notice nests objects or arrays deeper than 8 levels; refused');
		// Brackets inside strings do not count.
		expect(jsonDepthExceeds('{"a": "[[[[[[[[[[[[\\"[[["}', 2)).toBe(false);
	});

	it('refuses wrong types and missing fields, naming the field', () => {
		expect.hasAssertions();
		const doc = fixture('bns-update.json');
		const ev = doc.event!;
		expect(refusal(text({ ...doc, superevent_id: undefined }))).toBe('superevent_id is required (the event id)');
		expect(refusal(text({ ...doc, superevent_id: 'bad id' }))).toMatch(/^invalid notice field superevent_id: must be letters/);
		expect(refusal(text({ ...doc, alert_type: 'MAYBE' }))).toBe('alert_type "MAYBE" is not PRELIMINARY, INITIAL, UPDATE or RETRACTION');
		expect(refusal(text({ ...doc, time_created: 'yesterday' }))).toMatch(/^time_created is not an ISO-8601 date-time/);
		expect(refusal(text({ ...doc, event: null }))).toBe('a UPDATE notice needs its event object');
		expect(refusal(text({ ...fixture('retraction.json'), event: ev }))).toBe('a RETRACTION carries no event object (event must be null)');
		expect(refusal(text({ ...doc, event: { ...ev, far: '1e-9' } }))).toBe('event.far must be a number (Hz)');
		expect(refusal(text({ ...doc, event: { ...ev, far: -1 } }))).toBe('event.far must not be negative');
		expect(refusal(text({ ...doc, event: { ...ev, significant: 'yes' } }))).toBe('event.significant must be true or false');
		expect(refusal(text({ ...doc, event: { ...ev, instruments: 'H1' } }))).toBe('event.instruments must be a list of detector codes');
		expect(refusal(text({ ...doc, event: { ...ev, classification: { BNS: 1.5 } } }))).toBe('event.classification.BNS must lie in [0, 1]');
		expect(refusal(text({ ...doc, event: { ...ev, classification: {} } }))).toMatch(/gives no probability/);
		expect(refusal(text({ ...doc, event: { ...ev, classification: { BNS: 0.9, BBH: 0.9 } } }))).toMatch(/sum to 1.800, more than 1/);
		expect(refusal(text({ ...doc, event: { ...ev, skymap: 42 } }))).toBe('event.skymap must be the sky map as a base64 string');
	});

	it('refuses huge numbers: they parse to Infinity and are not finite', () => {
		expect.hasAssertions();
		const body = raw('json/bns-update.json').replace('"far": 1.2e-12', '"far": 1e999999');
		expect(refusal(body)).toBe('event.far must be a finite number (Hz)');
		const digits = raw('json/bns-update.json').replace('"far": 1.2e-12', `"far": ${'9'.repeat(400)}`);
		expect(refusal(digits)).toBe('event.far must be a finite number (Hz)');
	});

	it('refuses by size: the notice limit, and the sky-map limit computed from the base64 length before decoding', () => {
		expect.hasAssertions();
		const initial = raw('json/bns-initial.json');
		expect(maxJsonNoticeBytes({ maxBytes: 1000, maxSkymapBytes: 300 })).toBe(1400);
		expect(base64Length(300)).toBe(400);
		expect(refusal(initial, { maxSkymapBytes: 1000, maxBytes: 1000 })).toMatch(/^notice is 112083 bytes, larger than the 2336-byte limit/);
		// The map fits its own limit but the rest of the notice does not fit the notice limit.
		const padded = text({ ...fixture('bns-initial.json'), urls: { note: 'x'.repeat(5000) } });
		expect(refusal(padded, { maxBytes: 4000 })).toMatch(/bytes without its sky map, larger than the 4000-byte limit$/);
		expect(refusal(text({ ...fixture('retraction.json'), urls: { note: 'x'.repeat(5000) } }), { maxBytes: 4000 })).toMatch(/larger than the 4000-byte limit$/);
		// A map larger than the sky-map limit, decoded: refused from its length alone.
		expect(refusal(initial, { maxSkymapBytes: 80_000 })).toBe('the sky map inside the notice is 83693 bytes, over the 80000 bytes limit for a sky map');
	});

	it('refuses a gzip bomb: a small embedded map that would unpack past the cap', () => {
		expect.hasAssertions();
		const bomb = gzipSync(Buffer.alloc(24 * 1024 * 1024));
		expect(bomb.length).toBeLessThan(40_000);
		const doc = text({ ...fixture('bns-update.json'), event: { ...fixture('bns-update.json').event, skymap: bomb.toString('base64') } });
		expect(refusal(doc, { maxInflatedBytes: 8 * 1024 * 1024 })).toBe('the sky map inside the notice unpacks to more than 8 MiB, the limit for a sky map');
	});

	it('refuses an embedded map that is not base64, not FITS or gzip, or damaged gzip', () => {
		expect.hasAssertions();
		const doc = fixture('bns-update.json');
		const withMap = (skymap: string) => text({ ...doc, event: { ...doc.event, skymap } });
		expect(refusal(withMap('not base64!'))).toBe('event.skymap is not base64 (RFC 4648)');
		expect(refusal(withMap(Buffer.from('PNG pretending to be a map').toString('base64')))).toBe('the sky map inside the notice is neither a FITS file nor gzip');
		const cut = readFileSync(dir + 'skymap-demo.multiorder.fits.gz').subarray(0, 3000);
		expect(refusal(withMap(cut.toString('base64')))).toMatch(/^the sky map inside the notice is damaged gzip: /);
		// Line-wrapped base64 (MIME style) is accepted.
		const wrapped = readFileSync(dir + 'skymap-demo.multiorder.fits.gz').toString('base64').replace(/.{76}/g, '$&\n');
		expect(parseJsonNotice(withMap(wrapped)).embeddedSkymap!.byteLength).toBe(83693);
	});
});
