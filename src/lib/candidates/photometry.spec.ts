import { describe, expect, it } from 'vitest';
import { checkPhotometryRow, parsePhotometryCsv, parseUtcTime, PhotometryError, readPhotometryCsv } from './photometry.ts';

const HEADER = 'time,filter,mag,mag_err,limit';

describe('photometry CSV', () => {
	it('reads detections and upper limits, in any column order, with comments, CRLF and a BOM', () => {
		expect.hasAssertions();
		const text = '\uFEFF# from the night log\r\nfilter,time,limit,mag,mag_err\r\nr,2026-12-02T03:04:05Z,,18.25,0.05\r\n\r\ng,2026-12-02T04:00:00.5+01:00,21.5,,\r\n';
		const r = parsePhotometryCsv(text);
		expect(r.ok).toBe(true);
		if (!r.ok) return;
		expect(r.points).toEqual([
			{ time: '2026-12-02T03:04:05.000Z', timeMs: Date.UTC(2026, 11, 2, 3, 4, 5), filter: 'r', mag: 18.25, magErr: 0.05, limitMag: null },
			{ time: '2026-12-02T03:00:00.500Z', timeMs: Date.UTC(2026, 11, 2, 3, 0, 0, 500), filter: 'g', mag: null, magErr: null, limitMag: 21.5 }
		]);
	});

	it('accepts quoted cells through the shared CSV splitter', () => {
		expect.hasAssertions();
		const pts = readPhotometryCsv(`${HEADER}\n"2026-12-02T03:04:05Z","r ""wide""",18.1,0.1,`);
		expect(pts[0].filter).toBe('r "wide"');
	});

	it('refuses the whole file and names every bad line in plain words', () => {
		expect.hasAssertions();
		const text = [
			HEADER,
			'2026-12-02T03:04:05Z,r,18.2,0.05,', // line 2: fine
			'2026-12-02T03:04:05Z,r,abc,0.05,', // 3
			'2026-12-02T03:04:05Z,r,18.2,0,', // 4
			'2026-12-02T03:04:05Z,r,18.2,,', // 5
			'2026-12-02T03:04:05,r,18.2,0.1,', // 6
			'2026-02-30T03:04:05Z,r,18.2,0.1,', // 7
			'2026-12-02T03:04:05Z,,,,', // 8
			'2026-12-02T03:04:05Z,r,18.2,0.1', // 9
			'2026-12-02T03:04:05Z,r,,0.1,21', // 10
			'2026-12-02T03:04:05Z,r,45,0.1,' // 11
		].join('\n');
		const r = parsePhotometryCsv(text);
		expect(r.ok).toBe(false);
		if (r.ok) return;
		expect(r.errors).toEqual([
			{ line: 3, message: 'magnitude "abc" is not a number' },
			{ line: 4, message: 'magnitude error must be greater than 0' },
			{ line: 5, message: 'a magnitude needs its error (mag_err)' },
			{ line: 6, message: 'time "2026-12-02T03:04:05" has no time zone; add Z for UTC (e.g. 2026-12-02T03:04:05Z)' },
			{ line: 7, message: 'time "2026-02-30T03:04:05Z" is not an ISO 8601 time such as 2026-12-02T03:04:05Z' },
			{ line: 8, message: 'filter is missing' },
			{ line: 8, message: 'needs a magnitude (a detection) or a limit (an upper limit)' },
			{ line: 9, message: 'has 4 cells but the header has 5' },
			{ line: 10, message: 'a magnitude error without a magnitude: leave mag_err empty for an upper limit' },
			{ line: 11, message: 'magnitude 45 is outside 5–30' }
		]);
		expect(() => readPhotometryCsv(text)).toThrow(PhotometryError);
		expect(() => readPhotometryCsv(text)).toThrow('10 problems; the first, line 3: magnitude "abc" is not a number');
	});

	it('refuses a wrong header, an empty file and a header without rows', () => {
		expect.hasAssertions();
		expect(parsePhotometryCsv('time,filter,mag,magerr,limit\n')).toEqual({
			ok: false,
			errors: [
				{ line: 1, message: 'unknown column "magerr" (expected time, filter, mag, mag_err, limit)' },
				{ line: 1, message: 'the header lacks mag_err (expected time,filter,mag,mag_err,limit)' }
			]
		});
		expect(() => readPhotometryCsv('')).toThrow('line 1: the file is empty: expected the header time,filter,mag,mag_err,limit');
		expect(() => readPhotometryCsv(`# c\n${HEADER}\n`)).toThrow('line 2: the file has a header but no rows');
	});
});

describe('one photometry row (shared by CSV and JSON)', () => {
	it('takes JSON numbers as well as text', () => {
		expect.hasAssertions();
		const r = checkPhotometryRow({ time: '2026-12-02T03:04:05Z', filter: 'i', mag: 19.5, mag_err: 0.12, limit: null });
		expect(r).toEqual({
			ok: true,
			point: { time: '2026-12-02T03:04:05.000Z', timeMs: Date.UTC(2026, 11, 2, 3, 4, 5), filter: 'i', mag: 19.5, magErr: 0.12, limitMag: null }
		});
	});

	it('refuses non-finite numbers, a time given as a number and an over-long filter', () => {
		expect.hasAssertions();
		const r = checkPhotometryRow({ time: 1764644645000 as unknown as string, filter: 'x'.repeat(21), mag: Number.NaN, mag_err: 0.1 });
		expect(r).toEqual({
			ok: false,
			errors: ['time must be text such as 2026-12-02T03:04:05Z', 'filter must be at most 20 characters', 'magnitude "NaN" is not a number']
		});
	});

	it('parses ISO 8601 times with zones and refuses impossible dates', () => {
		expect.hasAssertions();
		expect(parseUtcTime('2026-12-02T03:04Z')).toBe(Date.UTC(2026, 11, 2, 3, 4));
		expect(parseUtcTime('2026-12-02T03:04:05.123456Z')).toBe(Date.UTC(2026, 11, 2, 3, 4, 5, 123));
		expect(parseUtcTime('2026-12-02T00:30:00-05:30')).toBe(Date.UTC(2026, 11, 2, 6, 0));
		expect(parseUtcTime('2028-02-29T00:00:00Z')).toBe(Date.UTC(2028, 1, 29));
		expect(parseUtcTime('2027-02-29T00:00:00Z')).toBeNull();
		expect(parseUtcTime('2026-12-02T24:00:00Z')).toBeNull();
		expect(parseUtcTime('yesterday')).toBeNull();
	});
});

describe('parsePhotometryCsv: quoting read by csv-parse', () => {
	it('names the line of a quote left open, and takes a quoted filter name', () => {
		expect.hasAssertions();
		const open = parsePhotometryCsv('time,filter,mag,mag_err,limit\n2026-12-02T03:04:05Z,"r",18.2,0.05,\n# note\n2026-12-02T03:05:05Z,"r,18.3,0.05,\n2026-12-02T03:06:05Z,r,18.4,0.05,\n');
		expect(open).toEqual({ ok: false, errors: [{ line: 4, message: 'a quote is left open' }] });
		const header = parsePhotometryCsv('"time,filter,mag,mag_err,limit\n');
		expect(header).toEqual({ ok: false, errors: [{ line: 1, message: 'the header has an unclosed quote' }] });
	});
});
