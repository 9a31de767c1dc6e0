import { describe, expect, it } from 'vitest';
import { CatalogCsvParser, catalogPartState, CatalogRowChecker, readCatalogPart, parseCatalogCsv, parseCatalogCsvStream, parseColumnMapping, SUN_ABS_MAG_B, SUN_ABS_MAG_K } from './catalog-csv.ts';

const GOOD = [
	'# a comment before the header',
	'id,ra,dec,distance,distance_err,weight',
	'G1,10.5,-20.25,40,4,1.5',
	'G2,359.9,89.9,100.25,,0.5',
	'G3,0,-90,12,1.2,2'
].join('\n');

describe('parseCatalogCsv', () => {
	it('reads the default header, comments, empty distance errors', () => {
		expect.hasAssertions();
		const r = parseCatalogCsv(GOOD);
		expect(r.ok).toBe(true);
		const c = r.catalog!;
		expect(c.id).toEqual(['G1', 'G2', 'G3']);
		expect(Array.from(c.raDeg)).toEqual([10.5, 359.9, 0]);
		expect(Array.from(c.decDeg)).toEqual([-20.25, 89.9, -90]);
		expect(Array.from(c.distanceMpc)).toEqual([40, 100.25, 12]);
		expect(Array.from(c.distanceErrMpc)).toEqual([4, 0, 1.2]);
		expect(Array.from(c.weight)).toEqual([1.5, 0.5, 2]);
		expect(c.weightSource).toBe('weight');
		expect(c.luminosityB10).toBeNull();
	});

	it('gives the same result for any chunking, with a BOM and CRLF line ends', () => {
		expect.hasAssertions();
		const text = '\ufeff' + GOOD.replace(/\n/g, '\r\n') + '\r\n';
		const whole = parseCatalogCsv(text);
		expect(whole.ok).toBe(true);
		for (const size of [1, 2, 3, 7, 13]) {
			const chunks: string[] = [];
			for (let i = 0; i < text.length; i += size) chunks.push(text.slice(i, i + size));
			const r = parseCatalogCsv(chunks);
			expect(r.catalog).toEqual(whole.catalog);
		}
		expect(whole.catalog!.id[0]).toBe('G1');
		expect(whole.mapping.id).toBe('id');
	});

	it('handles quoted fields (commas, doubled quotes, line breaks) and keeps line numbers right', () => {
		expect.hasAssertions();
		const text = [
			'name,"RAJ2000",DEJ2000,Dist',
			'"NGC ""x"", a",1,2,3',
			'"two',
			'lines",4,5,6',
			'bad,7,95,8'
		].join('\n');
		const r = parseCatalogCsv(text, { columns: { id: 'name', ra: 'RAJ2000', dec: 'DEJ2000', distance: 'Dist' }, skipInvalid: true });
		expect(r.ok).toBe(true);
		expect(r.catalog!.id).toEqual(['NGC "x", a', 'two\nlines']);
		expect(r.rejected.rows).toEqual([{ line: 5, reason: 'dec "95" is not a number in [-90, 90]' }]);
	});

	it('reports malformed rows with line numbers and returns nothing unless told to skip them', () => {
		expect.hasAssertions();
		const text = [
			'id,ra,dec,distance,distance_err,weight',
			'A,10,10,50,5,1',
			'B,361,10,50,5,1',
			'C,10,10,-1,5,1',
			'D,10,10,50,5',
			'E,ten,10,50,5,1',
			'A,11,11,50,5,1',
			'F,10,10,5000,5,1',
			'G,10,10,50,-2,1',
			'H,10,10,50,5,-1',
			'"I,10,10,50,5,1'
		].join('\n');
		const strict = parseCatalogCsv(text);
		expect(strict.ok).toBe(false);
		expect(strict.catalog).toBeNull();
		expect(strict.rowsSeen).toBe(9);
		expect(strict.rejected.count).toBe(9);
		expect(strict.rejected.rows.map((r) => r.line)).toEqual([3, 4, 5, 6, 7, 8, 9, 10, 11]);
		expect(strict.rejected.rows[2].reason).toBe('expected 6 fields, found 5');
		expect(strict.rejected.rows[4].reason).toBe('duplicate id "A" (first on line 2)');
		expect(strict.rejected.rows[8].reason).toBe('unterminated quoted field');
		const lenient = parseCatalogCsv(text, { skipInvalid: true, maxReported: 3 });
		expect(lenient.ok).toBe(true);
		expect(lenient.catalog!.id).toEqual(['A']);
		expect(lenient.rejected.count).toBe(9);
		expect(lenient.rejected.rows).toHaveLength(3);
	});

	it('converts B and K magnitudes and stellar mass to weights in 10^10 solar units', () => {
		expect.hasAssertions();
		// M = M_sun ⇒ L = 1 L_sun ⇒ weight 1e-10; apparent m = M + 5 log10(100 Mpc / 10 pc) = M + 35.
		const b = parseCatalogCsv(`id,ra,dec,distance,b_app\nx,1,1,100,${SUN_ABS_MAG_B + 35}\ny,1,1,10,${SUN_ABS_MAG_B - 25 + 30}`);
		expect(b.catalog!.weightSource).toBe('b');
		expect(b.catalog!.weight[0] / 1e-10).toBeCloseTo(1, 10);
		// 10 Mpc: modulus 30; m = M_sun − 25 + 30 ⇒ M = M_sun − 25 ⇒ L = 10^10 L_sun.
		expect(b.catalog!.weight[1]).toBeCloseTo(1, 10);
		expect(b.catalog!.luminosityB10![1]).toBeCloseTo(1, 10);
		const k = parseCatalogCsv(`id,ra,dec,distance,k_abs\nx,1,1,100,${SUN_ABS_MAG_K - 25}`);
		expect(k.catalog!.weightSource).toBe('k');
		expect(k.catalog!.weight[0]).toBeCloseTo(1, 10);
		const m = parseCatalogCsv('id,ra,dec,distance,mass\nx,1,1,100,3e10');
		expect(m.catalog!.weight[0]).toBeCloseTo(3, 12);
		const none = parseCatalogCsv('ra,dec,distance\n1,1,100\n2,2,200');
		expect(none.catalog!.id).toEqual(['1', '2']);
		expect(Array.from(none.catalog!.weight)).toEqual([1, 1]);
	});

	it('refuses a file without the needed columns, a mapping to a missing header, unknown fields', () => {
		expect.hasAssertions();
		expect(parseCatalogCsv('id,ra,dec\n1,2,3').fatal).toMatch(/header lacks distance/);
		expect(parseCatalogCsv('id,ra,dec,distance\n', { columns: { ra: 'RAJ2000' } }).fatal).toMatch(/column "RAJ2000"/);
		expect(parseCatalogCsv('# only a comment\n').fatal).toBe('no header line');
		expect(() => new CatalogCsvParser({ columns: { nope: 'x' } as never })).toThrow(/unknown catalogue field/);
		expect(parseCatalogCsv('ra,dec,distance\n1,1,1\n2,2,2\n3,3,3', { maxRows: 2 }).fatal).toBe('more than 2 rows');
	});
});

describe('parseColumnMapping', () => {
	it('reads FIELD=HEADER pairs and rejects others', () => {
		expect.hasAssertions();
		expect(parseColumnMapping('id=NAME, ra=RAJ2000,dec=DEJ2000')).toEqual({ id: 'NAME', ra: 'RAJ2000', dec: 'DEJ2000' });
		expect(() => parseColumnMapping('ra')).toThrow(/FIELD=HEADER/);
		expect(() => parseColumnMapping('colour=x')).toThrow(/unknown catalogue field/);
	});
});

describe('parseCatalogCsvStream (csv-parse stream)', () => {
	it('gives the same result as the whole-text reader for any chunking, quotes in comments included', async () => {
		expect.hasAssertions();
		const text = '\ufeff# made for a test, "quoted\r\n\r\n' + ['id,ra,dec,distance', '"NGC ""x"", a",1,2,3', '"two', 'lines",4,5,6', 'bad,7,95,8'].join('\r\n') + '\r\n';
		const options = { skipInvalid: true };
		const whole = parseCatalogCsv(text, options);
		expect(whole.ok).toBe(true);
		expect(whole.catalog!.id).toEqual(['NGC "x", a', 'two\r\nlines']);
		expect(whole.rejected.rows).toEqual([{ line: 7, reason: 'dec "95" is not a number in [-90, 90]' }]);
		for (const size of [1, 4, 11, 1000]) {
			const chunks: string[] = [];
			for (let i = 0; i < text.length; i += size) chunks.push(text.slice(i, i + size));
			const r = await parseCatalogCsvStream(chunks, options);
			expect(r).toEqual(whole);
		}
	});

	it('refuses a file whose quoting it cannot read past, naming the line, even when told to skip bad rows', async () => {
		expect.hasAssertions();
		const text = 'id,ra,dec,distance\nA,1,1,10\n"B"x,2,2,20\nC,3,3,30\n';
		for (const r of [parseCatalogCsv(text, { skipInvalid: true }), await parseCatalogCsvStream([text], { skipInvalid: true })]) {
			expect(r.ok).toBe(false);
			expect(r.fatal).toBe('line 3: malformed quoting (a quoted field has text after its closing quote); the rows after it were not read');
		}
		const broken = (async function* () {
			yield 'id,ra,dec,distance\nA,1,1,10\n';
			throw new Error('connection reset');
		})();
		expect((await parseCatalogCsvStream(broken)).fatal).toBe('the upload was interrupted: connection reset');
	});
});

describe('readCatalogPart (a file read part by part)', () => {
	it('gives the same result as the whole text for parts cut anywhere: BOM, comments, CRLF, quoted line breaks, multi-byte names', () => {
		expect.hasAssertions();
		const text =
			'\ufeff# made for a test, "quoted\r\n\r\n' +
			['id,ra,dec,distance,b_abs', '"NGC ""x"", a",1,2,3,-20', '"two', 'lines",4,5,6,-19', 'bad,7,95,8,-18', 'Galaxie é 🌌,9,9,9,-21', '"two', 'lines",1,1,1,-20'].join('\r\n') +
			'\r\n';
		const options = { skipInvalid: true };
		const whole = parseCatalogCsv(text, options);
		expect(whole.catalog!.id).toEqual(['NGC "x", a', 'two\r\nlines', 'Galaxie é 🌌']);
		expect(whole.rejected.rows.map((r) => r.line)).toEqual([7, 9]);
		expect(whole.rejected.rows[1].reason).toBe('duplicate id "two\r\nlines" (first on line 5)');
		const bytes = new TextEncoder().encode(text);
		for (const size of [1, 2, 3, 5, 8, 17, 64]) {
			const reader = new CatalogCsvParser(options);
			for (let i = 0; i < bytes.length; i += size) reader.push(bytes.slice(i, i + size));
			expect(reader.finish(), `parts of ${size} bytes`).toEqual(whole);
		}
	});

	it('stops at a record longer than the bound (a quote left open early in a big file), naming its line', () => {
		expect.hasAssertions();
		let st = catalogPartState({ maxRecordBytes: 64 });
		const enc = new TextEncoder();
		let part = readCatalogPart(st, enc.encode('id,ra,dec,distance\nA,1,1,10\n"B,2,2,20\n'), false);
		st = part.state;
		expect(part.rows.id).toEqual(['A']);
		expect(st.carry.length).toBeGreaterThan(0);
		part = readCatalogPart(st, enc.encode('C,3,3,30\n'.repeat(10)), false);
		expect(part.state.fatal).toBe('line 3: a record longer than 0 kB (a quote left open?); the rows after it were not read');
		expect(part.state.stopped).toBe(true);
	});

	it('checks a part in several ranges exactly as in one (rejected rows, duplicates and their reasons in order)', () => {
		expect.hasAssertions();
		const text = ['id,ra,dec,distance', 'A,1,1,10', 'B,400,1,10', 'A,2,2,20', 'C,3,3,x', 'D,4,4,40', 'B,5,5,50', 'E,6,6,60'].join('\n') + '\n';
		const { rows } = readCatalogPart(catalogPartState(), new TextEncoder().encode(text), true);
		const whole = new CatalogRowChecker(50);
		const keptWhole = whole.take(rows);
		expect(whole.rejectedCount).toBe(3);
		for (const step of [1, 2, 3]) {
			const split = new CatalogRowChecker(50);
			const kept: number[] = [];
			const cursor = { reason: 0 };
			for (let from = 0; from < rows.size; from += step) split.takeRange(rows, from, Math.min(rows.size, from + step), cursor, kept);
			expect(kept, `ranges of ${step}`).toEqual(keptWhole);
			expect(split.rejectedRows, `ranges of ${step}`).toEqual(whole.rejectedRows);
		}
	});
});
