/**
 * An event's record as files: its pointings, claims, candidates and photometry, each as CSV (a
 * header line, RFC 4180 quoting, CRLF) or JSON (the same column names). Any event, open or closed.
 * Times are ISO 8601 UTC; numbers are written as JavaScript writes them (shortest form that reads
 * back to the same value); an absent value is an empty CSV field and null in JSON.
 * In the CSV, text people typed (names, notes, filters, ids) goes through `spreadsheetText`, so a
 * note starting with `=` is written `'=…` and a spreadsheet shows it instead of running it; the
 * JSON keeps every value as stored (programs read it, not spreadsheets).
 */
import { getEvent } from '../alerts/events';
import { listClaims } from '../coordination/claims';
import { listPointings } from '../coordination/observations';
import { listCandidates } from '../candidates/candidates';
import { listPhotometry } from '../candidates/photometry';
import { csvTable, spreadsheetText } from '../../csv.ts';
import type { ExportKind } from '../../event-view.ts';

type Cell = string | number | null;
/** How a column is written: `text` from people (guarded in the CSV), `value` our own (numbers, times, ids we make, states). */
type Column = { name: string; kind: 'text' | 'value' };

export interface ExportTable {
	kind: ExportKind;
	columns: string[];
	rows: Record<string, Cell>[];
}

const iso = (d: Date | string | null | undefined): string | null => (d == null ? null : typeof d === 'string' ? d : d.toISOString());

const COLUMNS: { readonly [K in ExportKind]: readonly Column[] } = {
	pointings: cols('observation_id', '~observed_at', 'telescope_id', 'telescope', 'team_id', 'team', '~ra_deg', '~dec_deg', 'field_id', 'filter', '~exposure_s', '~limiting_mag', '~seeing_arcsec', '~source', 'reported_by', '~claim_id', 'notes', '~reported_at'),
	claims: cols('~claim_id', '~target_kind', 'target_id', 'filter', '~epoch', 'telescope_id', 'telescope', 'team_id', 'team', 'claimed_by', '~state', '~claimed_at', '~started_at', '~done_at', '~ended_at', 'note'),
	candidates: cols('~candidate_id', 'name', '~ra_deg', '~dec_deg', '~discovered_at', '~magnitude', '~magnitude_err', 'filter', 'telescope_id', 'telescope', 'team_id', 'team', 'reported_by', '~state', '~classification', 'notes', '~reported_at'),
	photometry: cols('~photometry_id', '~candidate_id', 'candidate', '~time', 'filter', '~mag', '~mag_err', '~limit_mag', '~observation_id', 'reported_by', '~source', '~reported_at')
};

/** Column names; a leading `~` marks a value of our own making (not guarded as people's text). */
function cols(...names: string[]): Column[] {
	return names.map((n) => (n.startsWith('~') ? { name: n.slice(1), kind: 'value' } : { name: n, kind: 'text' }));
}

function rowsOf(eventId: string, kind: ExportKind): Record<string, Cell>[] {
	switch (kind) {
		case 'pointings':
			return listPointings(eventId).map((o) => ({
				observation_id: o.id,
				observed_at: iso(o.observedAt),
				telescope_id: o.telescopeId,
				telescope: o.telescopeName,
				team_id: o.teamId,
				team: o.teamName,
				ra_deg: o.raDeg,
				dec_deg: o.decDeg,
				field_id: o.fieldId,
				filter: o.filter,
				exposure_s: o.exposureS,
				limiting_mag: o.limitingMag,
				seeing_arcsec: o.seeingArcsec,
				source: o.source,
				reported_by: o.reportedBy,
				claim_id: o.claimId,
				notes: o.notes,
				reported_at: iso(o.createdAt)
			}));
		case 'claims':
			return listClaims(eventId).map((c) => ({
				claim_id: c.id,
				target_kind: c.targetKind,
				target_id: c.targetId,
				filter: c.filter || null,
				epoch: c.epoch,
				telescope_id: c.telescopeId,
				telescope: c.telescopeName,
				team_id: c.teamId,
				team: c.teamName,
				claimed_by: c.userName,
				state: c.state,
				claimed_at: iso(c.claimedAt),
				started_at: iso(c.startedAt),
				done_at: iso(c.doneAt),
				ended_at: iso(c.endedAt),
				note: c.note
			}));
		case 'candidates':
			// Oldest report first, as the other files.
			return listCandidates(eventId)
				.reverse()
				.map((c) => ({
					candidate_id: c.id,
					name: c.name,
					ra_deg: c.raDeg,
					dec_deg: c.decDeg,
					discovered_at: c.discoveredAt,
					magnitude: c.magnitude,
					magnitude_err: c.magnitudeErr,
					filter: c.filter,
					telescope_id: c.telescopeId,
					telescope: c.telescopeName,
					team_id: c.teamId,
					team: c.teamName,
					reported_by: c.reportedBy,
					state: c.state,
					classification: c.classification,
					notes: c.notes,
					reported_at: c.createdAt
				}));
		case 'photometry':
			return listCandidates(eventId)
				.reverse()
				.flatMap((c) =>
					listPhotometry(c.id).map((p) => ({
						photometry_id: p.id,
						candidate_id: c.id,
						candidate: c.name,
						time: p.time,
						filter: p.filter,
						mag: p.mag,
						mag_err: p.magErr,
						limit_mag: p.limitMag,
						observation_id: p.observationId,
						reported_by: p.reportedBy,
						source: p.source,
						reported_at: p.createdAt
					}))
				);
	}
}

/** One kind of an event's record as a table, or null when there is no such event. */
export function eventExport(eventId: string, kind: ExportKind): (ExportTable & { sourceEventId: string }) | null {
	const event = getEvent(eventId);
	if (!event) return null;
	return { kind, sourceEventId: event.sourceEventId, columns: COLUMNS[kind].map((c) => c.name), rows: rowsOf(eventId, kind) };
}

/** The table as CSV (header line first). */
export function exportCsv(t: ExportTable): string {
	const columns = COLUMNS[t.kind];
	return csvTable(
		columns.map((c) => c.name),
		t.rows.map((r) =>
			columns.map((c) => {
				const v = r[c.name];
				if (v === null || v === undefined) return '';
				const s = String(v);
				return c.kind === 'text' ? spreadsheetText(s) : s;
			})
		)
	);
}

/** The table as the JSON document the export serves. */
export function exportJson(eventId: string, t: ExportTable & { sourceEventId: string }, now = new Date()) {
	return { eventId, sourceEventId: t.sourceEventId, kind: t.kind, exportedAt: now.toISOString(), columns: t.columns, rows: t.rows };
}

/** A file name for the export: `<source id>-<kind>.<ext>`, safe in a Content-Disposition header. */
export function exportFileName(sourceEventId: string, kind: ExportKind, ext: 'csv' | 'json'): string {
	return `${sourceEventId.replace(/[^A-Za-z0-9._-]/g, '_')}-${kind}.${ext}`;
}
