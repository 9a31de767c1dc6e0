import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import {
	decodeXmlEntities,
	farHzToPerYear,
	farPerYearToHz,
	NoticeParseError,
	noticeSchema,
	normaliseIsoTime,
	parseVoevent,
	sniffIvorn,
	SECONDS_PER_JULIAN_YEAR
} from './voevent.ts';

const dir = fileURLToPath(new URL('../../../tests/fixtures/notices/', import.meta.url));
const fixture = (name: string) => readFileSync(dir + name, 'utf8');

function expectRefused(xml: string | Uint8Array, pattern: RegExp, opts?: { maxBytes?: number }) {
	let error: unknown;
	try {
		parseVoevent(xml, opts);
	} catch (e) {
		error = e;
	}
	expect(error).toBeInstanceOf(NoticeParseError);
	const message = (error as Error).message;
	expect(message).toMatch(pattern);
	// One line, so that the CLI and logs can print it as is.
	expect(message).not.toMatch(/\n/);
}

describe('parseVoevent: well-formed notices', () => {
	it('reads a preliminary notice with a namespace prefix and Params inside Groups', () => {
		const n = parseVoevent(fixture('bns-preliminary.xml'));
		expect(n).toEqual({
			ivorn: 'ivo://strainline.example/fake-broker#SX30041207-1-preliminary',
			role: 'observation',
			authoredAt: '2030-04-12T07:31:09.000Z',
			eventTime: '2030-04-12T07:30:41.250Z',
			kind: 'preliminary',
			sourceEventId: 'SX30041207',
			far: 3.1e-10,
			classification: { BNS: 0.962, NSBH: 0.021, BBH: 0, Terrestrial: 0.017 },
			properties: { HasNS: 1, HasRemnant: 0.98, HasMassGap: 0.01 },
			skymapUrl: 'http://127.0.0.1:8098/skymaps/SX30041207-1.multiorder.fits.gz',
			citations: []
		});
		expect(noticeSchema.safeParse(n).success).toBe(true);
	});

	it('accepts alternative spellings, a default namespace, CDATA, a Value child, whitespace and yr-1 units', () => {
		const n = parseVoevent(fixture('bns-initial.xml'));
		expect(n.kind).toBe('initial');
		expect(n.sourceEventId).toBe('SX30041207');
		expect(n.authoredAt).toBe('2030-04-12T08:02:00.000Z');
		expect(n.eventTime).toBe('2030-04-12T07:30:41.250Z');
		// 0.0098 per Julian year of 31 557 600 s.
		expect(n.far).toBeCloseTo(0.0098 / 31557600, 20);
		// &amp; in the attribute is decoded.
		expect(n.skymapUrl).toBe('http://127.0.0.1:8098/skymaps/SX30041207-2.multiorder.fits.gz?v=2&format=fits');
		expect(n.classification).toEqual({ BNS: 0.97, NSBH: 0.02, BBH: 0, Terrestrial: 0.01 });
		expect(n.properties).toEqual({ HasNS: 1, HasRemnant: 0.99, HasMassGap: null });
		expect(n.citations).toEqual([
			{ ivorn: 'ivo://strainline.example/fake-broker#SX30041207-1-preliminary', cite: 'followup' }
		]);
	});

	it('reads an update with nested groups, a zone offset and two supersedes citations', () => {
		const n = parseVoevent(fixture('bns-update.xml'));
		expect(n.kind).toBe('update');
		// 09:15:30.5 at +01:00 is 08:15:30.5 UTC.
		expect(n.authoredAt).toBe('2030-04-12T08:15:30.500Z');
		expect(n.classification).toEqual({ BNS: 0.99, NSBH: 0.01, BBH: 0, Terrestrial: 0 });
		expect(n.properties).toBeNull();
		expect(n.citations.map((c) => c.cite)).toEqual(['supersedes', 'supersedes']);
	});

	it('reads a retraction that has no classification, FAR, time or sky map', () => {
		const n = parseVoevent(fixture('retraction.xml'));
		expect(n.kind).toBe('retraction');
		expect(n.classification).toBeNull();
		expect(n.skymapUrl).toBeNull();
		expect(n.far).toBeNull();
		expect(n.eventTime).toBeNull();
		expect(n.citations).toEqual([
			{ ivorn: 'ivo://strainline.example/fake-broker#SX30041315-1-preliminary', cite: 'retraction' }
		]);
	});

	it('keeps a retraction’s stated reason: from a Param, else Why/Description, else the citations’ Description', () => {
		const base = fixture('retraction.xml');
		expect(parseVoevent(base).reason).toBe('Retracted: instrumental artefact.');
		const why = base.replace('</What>', '</What>\n  <Why><Description>  Glitch in one\n   detector  </Description></Why>');
		expect(parseVoevent(why).reason).toBe('Glitch in one detector');
		const param = why.replace('<Param name="NoticeKind"', '<Param name="Retraction_Reason" value="Data-quality veto"/><Param name="NoticeKind"');
		expect(parseVoevent(param).reason).toBe('Data-quality veto');
		// Two differing reasons do not refuse the retraction: the first is kept.
		const two = param.replace('<Param name="NoticeKind"', '<Param name="Reason" value="second"/><Param name="NoticeKind"');
		expect(parseVoevent(two).reason).toBe('Data-quality veto');
		// No text anywhere: no reason, and nothing else changes.
		const none = base.replace(/<Description>[^<]*<\/Description>/, '');
		expect(parseVoevent(none)).not.toHaveProperty('reason');
		expect(parseVoevent(none).kind).toBe('retraction');
		// A long text is cut at a word and marked.
		const long = base.replace('Retracted: instrumental artefact.', 'word '.repeat(200));
		const cut = parseVoevent(long).reason!;
		expect(cut.length).toBeLessThanOrEqual(500);
		expect(cut.endsWith('word…')).toBe(true);
		// A Description on a notice that is not a retraction is not a reason.
		expect(parseVoevent(fixture('bns-preliminary.xml'))).not.toHaveProperty('reason');
	});

	it('infers a retraction from a retraction citation when the kind Param is absent', () => {
		const xml = fixture('retraction.xml').replace(/<Param name="NoticeKind"[^>]*\/>/, '');
		expect(parseVoevent(xml).kind).toBe('retraction');
	});

	it('reads a black-hole merger and a test-role notice', () => {
		const bbh = parseVoevent(fixture('bbh-initial.xml'));
		expect(bbh.classification?.BBH).toBe(0.991);
		expect(bbh.far).toBe(2.5e-9); // no unit: Hz
		expect(bbh.skymapUrl).toMatch(/^https:/);
		const test = parseVoevent(fixture('test-role.xml'));
		expect(test.role).toBe('test');
		expect(test.sourceEventId).toBe('SXT0001');
	});

	it('accepts bytes as well as a string, and a byte-order mark', () => {
		const bytes = new TextEncoder().encode('\ufeff' + fixture('bns-preliminary.xml'));
		expect(parseVoevent(bytes).sourceEventId).toBe('SX30041207');
	});
});

describe('parseVoevent: refused input', () => {
	it.each([
		['unclosed-tag.xml', /^malformed XML at line \d+, column \d+:/],
		['missing-event-id.xml', /missing required Param SourceEventId/],
		['missing-skymap.xml', /preliminary notice lacks required Param SkymapUrl/],
		['billion-laughs.xml', /DOCTYPE declarations are refused/],
		['external-entity.xml', /ENTITY declarations are refused/],
		['undefined-entity.xml', /undefined entity "&nbsp;"/],
		['bad-cite.xml', /cite="replaces" is not followup, supersedes or retraction/],
		['probability-overflow.xml', /sum to 1\.400, more than 1/],
		['wrong-root.xml', /root element is "Transport", not VOEvent/],
		['bad-far.xml', /not a number: "0x1F"/],
		['prediction-role.xml', /unsupported role "prediction"/]
	])('%s → %s', (name, pattern) => {
		expectRefused(fixture('malformed/' + name), pattern);
	});

	it('refuses a 50 MB body by size before parsing, quickly', () => {
		const head = fixture('bns-preliminary.xml').replace('</voe:VOEvent>', '');
		const big = head + '<How>' + 'x'.repeat(50 * 1024 * 1024) + '</How></voe:VOEvent>';
		const t0 = performance.now();
		expectRefused(big, /larger than the 1048576-byte limit/);
		const ms = performance.now() - t0;
		// A 50 MB string's UTF-8 length is counted, nothing is parsed: well under a second.
		expect(ms).toBeLessThan(1000);
	});

	it('refuses the billion-laughs document quickly (no expansion is attempted)', () => {
		const t0 = performance.now();
		expectRefused(fixture('malformed/billion-laughs.xml'), /DOCTYPE/);
		expect(performance.now() - t0).toBeLessThan(100);
	});

	it('honours a smaller size limit', () => {
		expectRefused(fixture('bns-preliminary.xml'), /larger than the 100-byte limit/, { maxBytes: 100 });
	});

	it('refuses empty input, text that is not XML, and a missing Who/Date', () => {
		expectRefused('   ', /notice is empty/);
		expectRefused('not xml at all', /malformed XML/);
		expectRefused(fixture('retraction.xml').replace(/<Who>.*<\/Who>/, ''), /missing Who\/Date/);
	});

	it('refuses conflicting duplicates and non-http sky-map URLs', () => {
		const dup = fixture('bns-preliminary.xml').replace(
			'<Param name="NoticeKind"',
			'<Param name="kind" value="update"/><Param name="NoticeKind"'
		);
		expectRefused(dup, /conflicting values for Param NoticeKind/);
		const ftp = fixture('bns-preliminary.xml').replace('value="http://127.0.0.1:8098', 'value="file:///etc');
		expectRefused(ftp, /skymapUrl: must be an http\(s\) URL/);
	});

	it('refuses a bad ISO time and a probability outside [0, 1]', () => {
		expectRefused(fixture('bns-preliminary.xml').replace('2030-04-12T07:31:09', '12/04/2030'), /Who\/Date is not an ISO-8601/);
		expectRefused(fixture('bns-preliminary.xml').replace('value="0.98"', 'value="1.5"'), /HasRemnant.*\[0, 1\], got 1.5/);
	});
});

describe('helpers', () => {
	it('converts FAR between Hz and per year with the Julian year', () => {
		// IAU Julian year: 365.25 d of 86 400 s (common practice for FAR in yr^-1).
		expect(SECONDS_PER_JULIAN_YEAR).toBe(31557600);
		expect(farHzToPerYear(1 / 31557600)).toBeCloseTo(1, 12);
		expect(farPerYearToHz(farHzToPerYear(3.1e-10))).toBeCloseTo(3.1e-10, 22);
		// One per century ≈ 3.17e-10 Hz.
		expect(farPerYearToHz(0.01)).toBeCloseTo(3.1688e-10, 13);
	});

	it('decodes predefined entities and character references only', () => {
		expect(decodeXmlEntities('a&lt;b&gt;c&amp;d&quot;e&apos;f&#65;&#x42;')).toBe('a<b>c&d"e\'fAB');
		expect(() => decodeXmlEntities('&copy;')).toThrow(/undefined entity/);
	});

	it('normalises ISO times to UTC with milliseconds', () => {
		expect(normaliseIsoTime('2030-01-01T00:00:00', 't')).toBe('2030-01-01T00:00:00.000Z');
		expect(normaliseIsoTime('2030-01-01T00:00:00.123456-0230', 't')).toBe('2030-01-01T02:30:00.123Z');
	});

	it('sniffs the ivorn of a notice even when the rest is malformed', () => {
		expect(sniffIvorn(fixture('malformed/unclosed-tag.xml'))).toBe(
			'ivo://strainline.example/fake-broker#SX30041600-1-preliminary'
		);
		expect(sniffIvorn('<Transport role="ack"/>')).toBeNull();
	});
});
