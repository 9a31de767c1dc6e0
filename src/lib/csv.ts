import { parse } from 'csv-parse/browser/esm/sync';

/**
 * Split one CSV line into trimmed cells (RFC 4180 double-quote rules, read by csv-parse's browser
 * build, which the catalogue page uses to preview a header). Returns null when a quote is left open
 * or the line cannot be read. Uploads are read on the server by `csv-read.ts`.
 */
export function splitCsvLine(line: string): string[] | null {
	try {
		const records = parse(line, { trim: true, relax_quotes: true, relax_column_count: true, record_delimiter: ['\r\n', '\n'] }) as string[][];
		return records[0] ?? [''];
	} catch {
		return null;
	}
}

const FORMULA_START = /^[=+\-@\t\r]/;
const PLAIN_NUMBER = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

/**
 * A free-text cell for a CSV that people may open in a spreadsheet: text starting with `=`, `+`,
 * `-`, `@`, tab or CR would be run as a formula there (CSV injection), so it gets a leading `'`,
 * which spreadsheets read as "this is text" (common practice, OWASP "CSV Injection"). A plain
 * number such as -23.4 is left as it is, so it stays a number. Apply to text that came from people
 * (names, ids, filters), not to numbers and positions our own formatting writes.
 */
export function spreadsheetText(value: string): string {
	return FORMULA_START.test(value) && !PLAIN_NUMBER.test(value) ? `'${value}` : value;
}

/** RFC 4180 field: quoted when it holds a comma, quote, CR or LF; quotes doubled inside. */
export function csvField(value: string): string {
	return /[",\r\n]/.test(value) ? `"${value.replace(/"/g, '""')}"` : value;
}

/** Rows as RFC 4180 CSV: a header line, CRLF line ends, each field quoted as needed (`csvField`). */
export function csvTable(header: readonly string[], rows: readonly (readonly string[])[]): string {
	return [header, ...rows].map((r) => r.map(csvField).join(',')).join('\r\n') + '\r\n';
}
