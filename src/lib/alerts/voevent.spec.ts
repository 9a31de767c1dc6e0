import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import {
	decodeXmlEntities,
	DEFAULT_VOCABULARY,
	farHzToPerYear,
	localPartOf,
	NoticeWaitError,
	readVoevent,
	streamOf,
	vocabularySchema,
	type NoticeVocabulary,
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

function expectRefused(xml: string | Uint8Array, pattern: RegExp, opts?: { maxBytes?: number }, vocabulary?: NoticeVocabulary) {
	let error: unknown;
	try {
		parseVoevent(xml, { ...opts, vocabulary });
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

// Standard semantics: IVOA VOEvent 2.0 (Recommendation, 2011) §2.2 (stream = IVORN before "#"),
// §3.1.2 (role), §3.7 / §3.7.1 (Citations, cite values). Fixtures in tests/fixtures/notices/standard/.
describe('readVoevent: VOEvent semantics and stream vocabularies', () => {
	const std = (name: string) => fixture('standard/' + name);
	const renamedVocabulary = vocabularySchema.parse(JSON.parse(std('renamed-params.vocabulary.json')));

	it('reads a namespaced and a default-namespace envelope alike', () => {
		const a = readVoevent(std('namespaced.xml'));
		expect(a).toMatchObject({ stream: 'ivo://strainline.example/fake-broker', eventIdFrom: 'param' });
		expect(a.notice).toMatchObject({ kind: 'preliminary', sourceEventId: 'SX30050101', far: 2.2e-10, citations: [] });
		const b = parseVoevent(std('default-namespace.xml'));
		expect(b).toMatchObject({ kind: 'initial', sourceEventId: 'SX30050202', eventTime: '2030-05-02T20:58:30.000Z' });
		// 0.05 per Julian year (31 557 600 s).
		expect(b.far).toBeCloseTo(0.05 / 31557600, 20);
	});

	it('tolerates CDATA and whitespace around names, values, units, times and cited IVORNs', () => {
		const n = parseVoevent(std('cdata-whitespace.xml'));
		expect(n).toMatchObject({
			sourceEventId: 'SX30050202',
			kind: 'update',
			far: 3e-12,
			authoredAt: '2030-05-02T21:30:00.000Z',
			eventTime: '2030-05-02T20:58:30.000Z',
			skymapUrl: 'http://127.0.0.1:8098/skymaps/SX30050202-2.multiorder.fits.gz?a=1&b=2',
			classification: { BNS: 0.8, NSBH: 0.15, BBH: 0, Terrestrial: 0.05 },
			citations: [{ ivorn: 'ivo://strainline.example/fake-broker#SX30050202-1-initial', cite: 'supersedes' }]
		});
	});

	it('takes the kind from the citations when no Param states it (§3.7): none → new, supersedes → update, followup, retraction', () => {
		expect(parseVoevent(std('supersedes-only.xml')).kind).toBe('update');
		const cites = (cite: string) => std('supersedes-only.xml').replace('cite="supersedes"', `cite="${cite}"`);
		expect(parseVoevent(cites('followup')).kind).toBe('followup');
		expect(parseVoevent(cites('retraction')).kind).toBe('retraction');
		const uncited = std('supersedes-only.xml').replace(/<Citations>[\s\S]*<\/Citations>/, '');
		expect(parseVoevent(uncited).kind).toBe('preliminary');
		// A stated kind wins over the citation.
		const stated = std('supersedes-only.xml').replace('<Param name="FalseAlarmRate"', '<Param name="NoticeKind" value="initial"/><Param name="FalseAlarmRate"');
		expect(parseVoevent(stated).kind).toBe('initial');
	});

	it('reads a follow-up that carries only part of the content, and a retraction citation outranks a supersedes one', () => {
		const followup = std('supersedes-only.xml')
			.replace('cite="supersedes"', 'cite="followup"')
			.replace(/<Group type="Skymap">.*<\/Group>/, '')
			.replace(/<Group type="Classification">[\s\S]*?<\/Group>/, '');
		expect(parseVoevent(followup)).toMatchObject({ kind: 'followup', skymapUrl: null, classification: null, far: 1.5e-11 });
		const both = std('supersedes-only.xml').replace('</Citations>', '<EventIVORN cite="retraction">ivo://strainline.example/fake-broker#x</EventIVORN></Citations>');
		expect(parseVoevent(both).kind).toBe('retraction');
	});

	it('takes the event of a retraction with an empty What from the packets it cites', () => {
		const events: Record<string, string> = {
			'ivo://strainline.example/fake-broker#SX30050101-1-preliminary': 'SX30050101',
			'ivo://strainline.example/fake-broker#SX30050101-2-revised': 'SX30050101'
		};
		const r = readVoevent(std('retraction-empty-what.xml'), { citedEvent: (ivorn) => events[ivorn] ?? null });
		expect(r.eventIdFrom).toBe('citation');
		expect(r.notice).toMatchObject({ kind: 'retraction', sourceEventId: 'SX30050101', reason: 'Withdrawn: a data-quality flag was raised after the fact.' });
		expect(r.notice.citations.map((c) => c.cite)).toEqual(['retraction', 'retraction']);
		// One cited packet known is enough.
		const one = readVoevent(std('retraction-empty-what.xml'), { citedEvent: (ivorn) => (ivorn.endsWith('-2-revised') ? 'SX30050101' : null) });
		expect(one.notice.sourceEventId).toBe('SX30050101');
	});

	it('waits, naming the cited packets, when none of them is known; refuses cited packets of two events', () => {
		let error: unknown;
		try {
			parseVoevent(std('retraction-empty-what.xml'));
		} catch (e) {
			error = e;
		}
		expect(error).toBeInstanceOf(NoticeWaitError);
		expect((error as NoticeWaitError).waitingFor).toEqual([
			'ivo://strainline.example/fake-broker#SX30050101-1-preliminary',
			'ivo://strainline.example/fake-broker#SX30050101-2-revised'
		]);
		expect((error as Error).message).toMatch(/^waiting for the cited notices ivo:\/\/.*-1-preliminary, ivo:\/\/.*-2-revised: the notice names its event only through them/);
		expectRefused(std('retraction-empty-what.xml'), /waiting for the cited notices/);
		let two: unknown;
		try {
			parseVoevent(std('retraction-empty-what.xml'), { citedEvent: (ivorn) => (ivorn.endsWith('-1-preliminary') ? 'SX1' : 'SX2') });
		} catch (e) {
			two = e;
		}
		expect(two).toBeInstanceOf(NoticeParseError);
		expect(two).not.toBeInstanceOf(NoticeWaitError);
		expect((two as Error).message).toMatch(/belong to different events .*→ SX1.*→ SX2/);
	});

	it("falls back to the stream's rule on the IVORN's local part: its own first, then the cited ones", () => {
		const vocabulary = { ...DEFAULT_VOCABULARY, eventIdFromIvorn: '^(SX\\d{8})-' };
		// Its own IVORN (#withdrawal-0042) does not match; the first cited one does.
		const r = readVoevent(std('retraction-empty-what.xml'), { vocabulary });
		expect(r).toMatchObject({ eventIdFrom: 'ivorn', notice: { sourceEventId: 'SX30050101' } });
		const own = std('supersedes-only.xml').replace('<Param name="SourceEventId" value="SX30050101"/>', '');
		expect(readVoevent(own, { vocabulary }).notice.sourceEventId).toBe('SX30050101');
		// No Param, nothing cited, no rule: refused, naming what was looked for.
		const bare = own.replace(/<Citations>[\s\S]*<\/Citations>/, '');
		expectRefused(bare, /^missing required Param SourceEventId \/ EventId .* \(and the stream states no rule for the IVORN's local part\)$/);
		expectRefused(bare, /finds no event id in the IVORN/, undefined, { ...DEFAULT_VOCABULARY, eventIdFromIvorn: '^(ZZ\\d+)' });
	});

	it('keeps test and utility roles; a missing role means observation (§3.1.2)', () => {
		expect(parseVoevent(std('test-role.xml'))).toMatchObject({ role: 'test', sourceEventId: 'SXT30050303' });
		expect(parseVoevent(std('utility-role.xml'))).toMatchObject({ role: 'utility', sourceEventId: 'SXU30050404' });
		expect(parseVoevent(std('namespaced.xml').replace('role="observation"', '')).role).toBe('observation');
	});

	it("reads renamed Params with the stream's vocabulary, and refuses them with the default one", () => {
		expectRefused(std('renamed-params.xml'), /missing required Param SourceEventId/);
		const r = readVoevent(std('renamed-params.xml'), { vocabulary: renamedVocabulary });
		expect(r.stream).toBe('ivo://strainline.example/alt-pipeline');
		expect(r.notice).toMatchObject({
			sourceEventId: 'A30050505',
			kind: 'initial',
			skymapUrl: 'http://127.0.0.1:8098/skymaps/A30050505-1.multiorder.fits.gz',
			classification: { BNS: 0.6, NSBH: 0.3, BBH: 0.05, Terrestrial: 0.05 },
			properties: { HasNS: 0.9, HasRemnant: 0.4, HasMassGap: 0.1 }
		});
		// The stream's FAR is per year when the Param states no unit: 0.5 / 31 557 600 s.
		expect(r.notice.far).toBeCloseTo(0.5 / 31557600, 20);
		// A stated unit still wins.
		const hz = std('renamed-params.xml').replace('value="0.5"/>', 'value="0.5" unit="Hz"/>');
		expect(parseVoevent(hz, { vocabulary: renamedVocabulary }).far).toBe(0.5);
		// Without the id Param, the stream's rule finds it in the IVORN.
		const noId = std('renamed-params.xml').replace('<Param name="Candidate_Label" value="A30050505"/>', '');
		expect(readVoevent(noId, { vocabulary: renamedVocabulary })).toMatchObject({ eventIdFrom: 'ivorn', notice: { sourceEventId: 'A30050505' } });
		// The renamed classification names are named in the reason when the group is missing.
		const noClass = std('renamed-params.xml').replace(/<Group name="SourceOdds">[\s\S]*?<\/Group>/, '');
		expectRefused(noClass, /initial notice lacks the Classification group \(pBNS, pNSBH, pBBH, pNoise\)/, undefined, renamedVocabulary);
	});

	it('checks a vocabulary: names, at least one per field, a rule with exactly one capture group', () => {
		expect(vocabularySchema.safeParse(DEFAULT_VOCABULARY).success).toBe(true);
		const bad = (change: Partial<NoticeVocabulary> | { names: Record<string, string[]> }) =>
			vocabularySchema.safeParse({ ...DEFAULT_VOCABULARY, ...change }).error?.issues[0].message;
		expect(bad({ eventIdFromIvorn: '^SX\\d+' })).toBe('The rule needs exactly one capture group ( … ); it has 0.');
		expect(bad({ eventIdFromIvorn: '^(SX)(\\d+)' })).toBe('The rule needs exactly one capture group ( … ); it has 2.');
		expect(bad({ eventIdFromIvorn: '^(SX' })).toMatch(/^This is not a regular expression/);
		expect(bad({ names: { ...DEFAULT_VOCABULARY.names, far: [] } })).toBe('Give at least one name.');
		expect(bad({ names: { ...DEFAULT_VOCABULARY.names, far: ['<Param>'] } })).toMatch(/letters, digits/);
		expect(streamOf('ivo://a.example/b/c#d-1')).toBe('ivo://a.example/b/c');
		expect(localPartOf('ivo://a.example/b/c#d-1')).toBe('d-1');
	});
});
