/**
 * A reported pointing's own rules, and reading a CSV of pointings: pure (no database, files or
 * clock), so the work pool can read an upload (task `readPointingCsv`) while the server's thread
 * does only the checks that need the store (`server/coordination/observations.ts`).
 */
import { z } from 'zod';
import { readCsv } from '../csv-read.ts';
import '../field-messages.ts';

const RA_RANGE = 'RA (deg, J2000) must be from 0 up to (not including) 360.';
const DEC_RANGE = 'Dec (deg, J2000) must be from −90 to 90.';
const EXPOSURE_RANGE = 'Exposure (s) must be greater than 0 and at most 86 400 (one day).';
const MAG_RANGE = 'Limiting magnitude (AB) must be from 5 to 30.';
const SEEING_RANGE = 'Seeing (arcsec) must be greater than 0 and at most 20.';

/** One pointing as reported; either (raDeg, decDeg) or fieldId must be given. */
export const pointingShape = z.object({
	eventId: z.string().min(1).max(80),
	telescopeId: z.string().min(1).max(80).optional(),
	observedAt: z.iso.datetime({ offset: true }),
	raDeg: z.number().min(0, RA_RANGE).lt(360, RA_RANGE).optional(),
	decDeg: z.number().min(-90, DEC_RANGE).max(90, DEC_RANGE).optional(),
	fieldId: z.string().min(1).max(80).optional(),
	filter: z.string().min(1).max(20),
	exposureS: z.number().gt(0, EXPOSURE_RANGE).max(86_400, EXPOSURE_RANGE),
	limitingMag: z.number().min(5, MAG_RANGE).max(30, MAG_RANGE),
	seeingArcsec: z.number().gt(0, SEEING_RANGE).max(20, SEEING_RANGE).optional(),
	notes: z.string().max(2000).optional()
});
export const observationInput = pointingShape.refine((o) => (o.raDeg !== undefined && o.decDeg !== undefined) || o.fieldId !== undefined, {
	message: 'Give RA and Dec, or a field id.',
	path: ['raDeg']
});
export type ObservationInput = z.infer<typeof observationInput>;

/** Zod issues → `{ field: message }`, first message per field. */
export function fieldErrors(e: z.ZodError): Record<string, string> {
	const out: Record<string, string> = {};
	for (const i of e.issues) out[i.path.join('.') || 'body'] ??= i.message;
	return out;
}

const CSV_COLUMNS = ['observed_at', 'ra_deg', 'dec_deg', 'field_id', 'filter', 'exposure_s', 'limiting_mag', 'seeing_arcsec', 'notes'] as const;
const REQUIRED_COLUMNS = ['observed_at', 'filter', 'exposure_s', 'limiting_mag'] as const;

export type CsvPointing = Omit<ObservationInput, 'eventId' | 'telescopeId'>;

export type PointingCsvParse =
	| { rows: CsvPointing[]; lines: number[]; errors: [] }
	| { rows: []; lines: []; errors: { line: number; message: string }[] };

/**
 * Parse an uploaded CSV of pointings. Header names (any order): observed_at, ra_deg, dec_deg,
 * field_id, filter, exposure_s, limiting_mag, seeing_arcsec, notes. All or nothing: any bad row
 * returns every error with its 1-based line number and no rows. Only the pointing's own rules
 * are checked here; its telescope, event and field are the server's (`reportMany`).
 */
export function parsePointingCsv(text: string): PointingCsvParse {
	const { records, error } = readCsv(text);
	const errors: { line: number; message: string }[] = [];
	const header = records[0]?.cells.map((h) => h.toLowerCase()) ?? [];
	const headerLine = records[0]?.line ?? 1;
	for (const h of header) if (!(CSV_COLUMNS as readonly string[]).includes(h)) errors.push({ line: headerLine, message: `unknown column "${h}" (known: ${CSV_COLUMNS.join(', ')})` });
	for (const r of REQUIRED_COLUMNS) if (!header.includes(r)) errors.push({ line: headerLine, message: `missing column "${r}"` });
	if (!records.length && error) errors.push({ line: error.line, message: 'unterminated quote' });
	if (errors.length) return { rows: [], lines: [], errors };
	const rows: CsvPointing[] = [];
	const rowLines: number[] = [];
	const schema = pointingShape.omit({ eventId: true, telescopeId: true });
	for (const { line, cells } of records.slice(1)) {
		if (cells.length === 1 && cells[0] === '') continue;
		if (cells.length !== header.length) {
			errors.push({ line, message: `${cells.length} cells, header has ${header.length}` });
			continue;
		}
		const get = (c: string) => {
			const v = cells[header.indexOf(c)];
			return v === undefined || v === '' ? undefined : v;
		};
		const num = (c: string) => {
			const v = get(c);
			return v === undefined ? undefined : Number(v);
		};
		const candidate = {
			observedAt: get('observed_at'),
			raDeg: num('ra_deg'),
			decDeg: num('dec_deg'),
			fieldId: get('field_id'),
			filter: get('filter'),
			exposureS: num('exposure_s'),
			limitingMag: num('limiting_mag'),
			seeingArcsec: num('seeing_arcsec'),
			notes: get('notes')
		};
		const parsed = schema.safeParse(candidate);
		if (!parsed.success) {
			for (const message of Object.values(fieldErrors(parsed.error))) errors.push({ line, message });
			continue;
		}
		if ((parsed.data.raDeg === undefined || parsed.data.decDeg === undefined) && !parsed.data.fieldId) {
			errors.push({ line, message: 'give ra_deg and dec_deg, or field_id' });
			continue;
		}
		rows.push(parsed.data);
		rowLines.push(line);
	}
	// csv-parse cannot go on reliably past an unreadable record: it ends the list, and nothing is stored.
	if (error)
		errors.push({
			line: error.line,
			message: error.kind === 'unclosed-quote' ? 'unterminated quote' : 'a quoted cell has text after its closing quote (quote the whole cell); the rows after it were not read'
		});
	if (errors.length) return { rows: [], lines: [], errors };
	if (rows.length === 0) return { rows: [], lines: [], errors: [{ line: 1, message: 'no data rows' }] };
	return { rows, lines: rowLines, errors: [] };
}
