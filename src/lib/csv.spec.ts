import { describe, expect, it } from 'vitest';
import { splitCsvLine, spreadsheetText } from './csv';

describe('splitCsvLine (RFC 4180 quoting)', () => {
	it('splits, trims and unquotes', () => {
		expect(splitCsvLine(' a , "b, c" ,d')).toEqual(['a', 'b, c', 'd']);
		expect(splitCsvLine('"say ""hi""",2')).toEqual(['say "hi"', '2']);
		expect(splitCsvLine('x,,')).toEqual(['x', '', '']);
	});
	it('reports an open quote', () => {
		expect(splitCsvLine('"open,1')).toBeNull();
	});
});

describe('spreadsheetText (cells a spreadsheet would run as a formula)', () => {
	it('prefixes a quote to text starting with = + - @, tab or CR', () => {
		expect.hasAssertions();
		expect(spreadsheetText('=HYPERLINK("http://x.test","click")')).toBe('\'=HYPERLINK("http://x.test","click")');
		expect(spreadsheetText('+cmd|x')).toBe("'+cmd|x");
		expect(spreadsheetText('-2+3+cmd')).toBe("'-2+3+cmd");
		expect(spreadsheetText('@SUM(A1:A9)')).toBe("'@SUM(A1:A9)");
		expect(spreadsheetText('\t=1')).toBe("'\t=1");
		expect(spreadsheetText('\r=1')).toBe("'\r=1");
	});
	it('leaves plain numbers, ordinary text and the empty cell alone', () => {
		expect.hasAssertions();
		for (const v of ['-23.4', '+5', '-0.5e-3', '1e10', 'NGC 4993', 'a=b', '', 'r']) expect(spreadsheetText(v)).toBe(v);
	});
});
