import { describe, expect, it } from 'vitest';
import { readCsv, streamCsv, type CsvRecord } from './csv-read.ts';

async function streamed(text: string, size: number) {
	const chunks: string[] = [];
	for (let i = 0; i < text.length; i += size) chunks.push(text.slice(i, i + size));
	const records: CsvRecord[] = [];
	const error = await streamCsv(chunks, (r) => records.push(r));
	return { records, error };
}

describe('readCsv / streamCsv (csv-parse)', () => {
	it('gives each record the line it starts on, across blank lines and quoted line breaks', async () => {
		expect.hasAssertions();
		const text = '\ufeffa,b\r\n1,2\r\n\r\n"two\r\nlines",3\r\n  \r\n" x ""q"" " , 5\r\n';
		const whole = readCsv(text);
		expect(whole.error).toBeNull();
		expect(whole.records).toEqual([
			{ line: 1, cells: ['a', 'b'] },
			{ line: 2, cells: ['1', '2'] },
			{ line: 4, cells: ['two\r\nlines', '3'] },
			{ line: 7, cells: [' x "q" ', '5'] }
		]);
		for (const size of [1, 2, 5, 64]) expect(await streamed(text, size)).toEqual(whole);
	});

	it('names the line of a quote left open at the end, and of text after a closing quote, and stops there', async () => {
		expect.hasAssertions();
		const open = 'a,b\n1,2\n"open,3\n4,5\n';
		expect(readCsv(open)).toEqual({ records: [{ line: 1, cells: ['a', 'b'] }, { line: 2, cells: ['1', '2'] }], error: expect.objectContaining({ line: 3, kind: 'unclosed-quote' }) });
		expect(readCsv('a,b\n1,2\n"open,3').error).toMatchObject({ line: 3, kind: 'unclosed-quote' });
		const after = readCsv('a,b\n1,2\n"x"y,2\n3,4\n');
		expect(after.error).toMatchObject({ line: 3, kind: 'malformed' });
		expect(after.records.map((r) => r.line)).toEqual([1, 2]);
		for (const size of [1, 3, 100]) {
			expect((await streamed(open, size)).error).toMatchObject({ line: 3, kind: 'unclosed-quote' });
			expect((await streamed('a,b\n1,2\n"x"y,2\n3,4\n', size)).error).toMatchObject({ line: 3, kind: 'malformed' });
		}
	});

	it('streams bytes split inside a multi-byte character', async () => {
		expect.hasAssertions();
		const bytes = new TextEncoder().encode('name,dec\nCentaurus Ω,−30\n');
		const records: CsvRecord[] = [];
		const chunks = Array.from(bytes, (b) => Uint8Array.of(b));
		expect(await streamCsv(chunks, (r) => records.push(r))).toBeNull();
		expect(records[1]).toEqual({ line: 2, cells: ['Centaurus Ω', '−30'] });
	});
});

describe('line numbers with CR LF inside quoted cells', () => {
	it('counts a quoted CR LF as one line', async () => {
		expect.hasAssertions();
		const text = 'a,b\r\n"x\r\ny",1\r\nb,2\r\n"open\r\nstill,3\r\n';
		const out = readCsv(text);
		expect(out.records.map((r) => r.line)).toEqual([1, 2, 4]);
		expect(out.error).toMatchObject({ line: 5, kind: 'unclosed-quote' });
		expect(await streamed(text, 3)).toEqual(out);
	});
});
