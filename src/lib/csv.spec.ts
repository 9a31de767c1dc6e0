import { describe, expect, it } from 'vitest';
import { splitCsvLine } from './csv';

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
