/**
 * Reading CSV uploads with csv-parse (RFC 4180: quoted fields, doubled quotes, quoted line breaks;
 * LF or CRLF; an optional UTF-8 byte-order mark), each record with the physical line it starts
 * on, so that every refusal can name a line. Pure: text (or chunks of it) in, plain data out.
 *
 * Cells are trimmed outside quotes; a quote inside an unquoted cell is kept as a character; rows
 * may have any number of cells (the callers say "found N, header has M" themselves); blank lines
 * are skipped. A record csv-parse cannot read (a quote left open, text after a closing quote) is
 * an error with its line: csv-parse does not resume reliably after one (the records that follow
 * may be swallowed), so callers refuse the file rather than lose rows without saying so.
 */
import { parse as parseSync } from 'csv-parse/sync';
import { parse as parseStream, type CsvError, type Options } from 'csv-parse';

export interface CsvRecord {
	/** 1-based physical line on which the record starts. */
	line: number;
	cells: string[];
}

export interface CsvReadError {
	/** 1-based physical line on which the unreadable record starts. */
	line: number;
	/** 'unclosed-quote' when the file ends inside a quoted cell; 'malformed' otherwise. */
	kind: 'unclosed-quote' | 'malformed';
	/** csv-parse's own words, for logs. */
	detail: string;
}

const OPTIONS: Options = {
	bom: true,
	trim: true,
	relax_quotes: true,
	relax_column_count: true,
	skip_empty_lines: true,
	record_delimiter: ['\r\n', '\n'],
	raw: true
};

function newlines(s: string): number {
	let n = 0;
	for (let i = s.indexOf('\n'); i >= 0; i = s.indexOf('\n', i + 1)) n++;
	return n;
}

function crlfs(s: string): number {
	let n = 0;
	for (let i = s.indexOf('\r\n'); i >= 0; i = s.indexOf('\r\n', i + 2)) n++;
	return n;
}

/**
 * Physical line numbers from csv-parse's count. csv-parse counts the line a record ENDS on, and
 * counts a CR LF inside a quoted cell as two line breaks; `extra` carries that surplus forward.
 */
class LineCounter {
	private extra = 0;

	start(cells: string[], endLine: number): number {
		let inside = 0;
		for (const cell of cells) {
			if (cell.indexOf('\n') < 0) continue;
			inside += newlines(cell);
			this.extra += crlfs(cell);
		}
		return endLine - this.extra - inside;
	}

	error(e: unknown, raw: string | undefined): CsvReadError {
		const err = e as CsvError & { lines?: number };
		// The raw text may begin with blank lines csv-parse skipped; the record starts after them.
		const body = (raw ?? '').replace(/^(?:[ \t]*\r?\n)+/, '');
		const quoted = err.code === 'CSV_QUOTE_NOT_CLOSED';
		return {
			line: Math.max(1, (err.lines ?? 1) - this.extra - (quoted ? crlfs(body) : 0) - newlines(body) + (body.endsWith('\n') ? 1 : 0)),
			kind: quoted ? 'unclosed-quote' : 'malformed',
			detail: err.message
		};
	}
}

/** csv-parse options with the line bookkeeping: records come out as `CsvRecord`s, none after an error. */
function optionsWith(state: { error: CsvReadError | null }): Options {
	const lines = new LineCounter();
	return {
		...OPTIONS,
		skip_records_with_error: true,
		// Called in order with the record being read, so every record before an error has been counted.
		on_skip: (e: CsvError | undefined, raw: string | undefined) => {
			state.error ??= lines.error(e, raw);
		},
		on_record: (record: unknown, info: { lines: number }) => {
			if (state.error) return null;
			const cells = (record as { record: string[] }).record;
			return { line: lines.start(cells, info.lines), cells } satisfies CsvRecord;
		}
	} as Options;
}

/**
 * The complete records at the start of `bytes` (UTF-8), one part of a larger file: records come
 * with lines counted from the part's first line (1), `consumed` is how many bytes they span (the
 * rest — the record still being read — goes in front of the next part). With `final`, the part
 * is the end of the file and everything is read. A quote left open is only an error at the end
 * of the file: before it, the record is simply not complete yet. `bytes` must begin at the start
 * of a record.
 */
export function readCsvPart(bytes: Uint8Array, final: boolean): { records: CsvRecord[]; consumed: number; error: CsvReadError | null } {
	// Only whole lines: a line break is never inside a UTF-8 sequence, so every cell decodes whole.
	const cut = final ? bytes.length : bytes.lastIndexOf(0x0a) + 1;
	if (cut === 0) return { records: [], consumed: 0, error: null };
	const state: { error: CsvReadError | null } = { error: null };
	const options = optionsWith(state);
	const onRecord = options.on_record as (record: unknown, info: { lines: number; bytes: number }) => CsvRecord | null;
	let end = 0;
	options.on_record = ((record: unknown, info: { lines: number; bytes: number }) => {
		const out = onRecord(record, info);
		if (out) end = info.bytes;
		return out;
	}) as unknown as Options['on_record'];
	const view = Buffer.from(bytes.buffer, bytes.byteOffset, cut);
	const records = parseSync(view, options) as unknown as CsvRecord[];
	if (!final && state.error?.kind === 'unclosed-quote') return { records, consumed: end, error: null };
	return { records, consumed: final || state.error ? bytes.length : cut, error: state.error };
}

/**
 * Every record of a whole CSV text, or the first record that could not be read (with the records
 * before it). For uploads small enough to hold whole (pointings, photometry).
 */
export function readCsv(text: string): { records: CsvRecord[]; error: CsvReadError | null } {
	const state: { error: CsvReadError | null } = { error: null };
	const records = parseSync(text, optionsWith(state)) as unknown as CsvRecord[];
	return { records, error: state.error };
}

/** Text handed to csv-parse at once while streaming: ≈ 10–30 ms of parsing on this hardware. */
const PIECE = 16 * 1024;

/** A chunk cut into pieces of at most PIECE (strings never inside a surrogate pair). */
function* pieces(chunk: string | Uint8Array): Generator<string | Buffer> {
	if (typeof chunk !== 'string') {
		const bytes = Buffer.from(chunk.buffer, chunk.byteOffset, chunk.byteLength);
		for (let at = 0; at < bytes.length; at += PIECE) yield bytes.subarray(at, at + PIECE);
		return;
	}
	for (let at = 0; at < chunk.length; ) {
		let end = Math.min(chunk.length, at + PIECE);
		const code = chunk.charCodeAt(end - 1);
		if (end < chunk.length && code >= 0xd800 && code <= 0xdbff) end--;
		yield chunk.slice(at, end);
		at = end;
	}
}

/**
 * Records of a CSV arriving in chunks (strings or UTF-8 bytes), read with csv-parse's stream: only
 * the chunk in hand and the record being read are held, whatever the file's size, and the event
 * loop gets a turn between chunks. `onRecord` is called for each record in order; the promise
 * resolves with the first unreadable record's error (reading stops there) or null.
 */
export async function streamCsv(
	chunks: AsyncIterable<string | Uint8Array> | Iterable<string | Uint8Array>,
	onRecord: (record: CsvRecord) => void
): Promise<CsvReadError | null> {
	const state: { error: CsvReadError | null } = { error: null };
	const parser = parseStream(optionsWith(state));
	const feeding = (async () => {
		try {
			for await (const chunk of chunks) {
				for (const piece of pieces(chunk)) {
					if (state.error) break;
					if (!parser.write(piece)) await new Promise<void>((resolve) => parser.once('drain', resolve));
					// csv-parse reads a written piece in one go, and the stream's own hand-offs are
					// microtasks and next ticks, which never let I/O in: give the event loop a turn.
					await new Promise<void>((resolve) => setImmediate(resolve));
				}
				if (state.error) break;
			}
			parser.end();
		} catch (e) {
			parser.destroy(e as Error);
		}
	})();
	try {
		for await (const record of parser as AsyncIterable<CsvRecord>) onRecord(record);
	} finally {
		await feeding;
	}
	return state.error;
}
