/**
 * One telescope's observing list from a network plan, as CSV (RFC 4180) or JSON, for the
 * telescope's own scheduling software. Column set and meaning: docs/plan.md.
 *
 * Pure: plain data in, text out.
 */
import type { NetworkPlan, PlanAssignment, TelescopePlan } from './plan-types.ts';
import { csvField, spreadsheetText } from '../csv.ts';

export interface SexagesimalOptions {
	/** Decimals of the last field (seconds of time for RA, arcseconds for Dec). */
	decimals?: number;
	/** 'colon' → 05:34:31.92 / +22:00:52.2; 'letters' → 05h34m31.92s / +22d00m52.2s. */
	style?: 'colon' | 'letters';
}

function checkDecimals(decimals: number): void {
	if (!Number.isInteger(decimals) || decimals < 0 || decimals > 6) throw new Error(`decimals must be a whole number 0…6, got ${decimals}`);
}

/** Splits a non-negative count of 10^-decimals units into whole units, minutes and seconds. */
function splitSexagesimal(totalUnits: number, decimals: number): [number, number, string] {
	const scale = 10 ** decimals;
	const perMinute = 60 * scale;
	const perWhole = 3600 * scale;
	const whole = Math.floor(totalUnits / perWhole);
	const minutes = Math.floor((totalUnits - whole * perWhole) / perMinute);
	const rest = totalUnits - whole * perWhole - minutes * perMinute;
	const seconds = (rest / scale).toFixed(decimals);
	return [whole, minutes, seconds.padStart(decimals > 0 ? 3 + decimals : 2, '0')];
}

/**
 * Right ascension in hours, minutes and seconds of time (RA/15 h), rounded once on the last
 * field so that 59.99… s carries into the minutes; 24 h wraps to 00h. Checked against astropy
 * 5.2.1 `Angle.to_string(unit=hour)` in plan-export.spec.ts.
 */
export function formatRaHms(raDeg: number, options: SexagesimalOptions = {}): string {
	const decimals = options.decimals ?? 2;
	checkDecimals(decimals);
	if (!Number.isFinite(raDeg)) throw new Error(`ra must be a finite number, got ${String(raDeg)}`);
	const unitsPerDay = 24 * 3600 * 10 ** decimals;
	let units = Math.round((((raDeg % 360) + 360) % 360) / 15 * 3600 * 10 ** decimals);
	if (units >= unitsPerDay) units -= unitsPerDay;
	const [h, m, s] = splitSexagesimal(units, decimals);
	const hh = String(h).padStart(2, '0');
	const mm = String(m).padStart(2, '0');
	return options.style === 'letters' ? `${hh}h${mm}m${s}s` : `${hh}:${mm}:${s}`;
}

/** Declination as ±DD:MM:SS.s (always signed), rounded once on the arcseconds so that carries propagate. */
export function formatDecDms(decDeg: number, options: SexagesimalOptions = {}): string {
	const decimals = options.decimals ?? 1;
	checkDecimals(decimals);
	if (!Number.isFinite(decDeg) || decDeg < -90 || decDeg > 90) throw new Error(`dec must be within −90…90 degrees, got ${String(decDeg)}`);
	const units = Math.round(Math.abs(decDeg) * 3600 * 10 ** decimals);
	const sign = decDeg < 0 && units > 0 ? '-' : '+';
	const [d, m, s] = splitSexagesimal(units, decimals);
	const dd = String(d).padStart(2, '0');
	const mm = String(m).padStart(2, '0');
	return options.style === 'letters' ? `${sign}${dd}d${mm}m${s}s` : `${sign}${dd}:${mm}:${s}`;
}

/** The columns, in order. Units are in the names; times are ISO-8601 UTC. */
export const OBSERVING_LIST_COLUMNS = [
	'order',
	'target_id',
	'name',
	'kind',
	'ra_deg',
	'dec_deg',
	'ra_hms',
	'dec_dms',
	'start_utc',
	'end_utc',
	'exposure_s',
	'filter',
	'epoch',
	'airmass_start',
	'altitude_start_deg',
	'moon_separation_deg',
	'probability',
	'cumulative_probability'
] as const;

export type ObservingListColumn = (typeof OBSERVING_LIST_COLUMNS)[number];

export interface ObservingListRow {
	order: number;
	targetId: string;
	name: string | null;
	kind: 'galaxy' | 'field';
	raDeg: number;
	decDeg: number;
	raHms: string;
	decDms: string;
	startUtc: string;
	endUtc: string;
	exposureS: number;
	filter: string | null;
	epoch: number | null;
	airmassStart: number;
	altitudeStartDeg: number;
	moonSeparationDeg: number;
	probability: number;
	/** Running sum of the probability this list adds to the network's coverage. */
	cumulativeProbability: number;
}

function telescopePlanOf(plan: NetworkPlan, telescopeId: string): TelescopePlan {
	const found = plan.telescopes.find((t) => t.telescopeId === telescopeId);
	if (!found) throw new Error(`telescope ${telescopeId} is not in this plan`);
	return found;
}

function rowOf(a: PlanAssignment): ObservingListRow {
	return {
		order: a.order,
		targetId: a.targetId,
		name: a.name,
		kind: a.kind,
		raDeg: a.raDeg,
		decDeg: a.decDeg,
		raHms: formatRaHms(a.raDeg),
		decDms: formatDecDms(a.decDeg),
		startUtc: a.start,
		endUtc: a.end,
		exposureS: a.exposureS,
		filter: a.filter,
		epoch: a.epoch,
		airmassStart: a.airmass,
		altitudeStartDeg: a.altitudeDeg,
		moonSeparationDeg: a.moonSepDeg,
		probability: a.probability,
		cumulativeProbability: a.cumulativeProbability
	};
}

/** The observing list of one telescope, in plan order. */
export function observingListRows(plan: NetworkPlan, telescopeId: string): ObservingListRow[] {
	return telescopePlanOf(plan, telescopeId).assignments.map(rowOf);
}

function fixed(x: number, decimals: number): string {
	return Number.isFinite(x) ? x.toFixed(decimals) : '';
}

/**
 * CSV with a header line and CRLF line ends (RFC 4180). Positions to 1e-6° (< 0.004″),
 * airmass to 0.001, altitude and Moon distance to 0.01°, probabilities to 1e-8.
 * Text that came from people (target id, name, filter) goes through `spreadsheetText`, so a name
 * like `=HYPERLINK(…)` is written `'=HYPERLINK(…)` and a spreadsheet shows it instead of running
 * it; numbers, sexagesimal positions (±DD:MM:SS) and times are our own formatting and stay as they
 * are. The JSON export keeps every value unchanged: programs read it, not spreadsheets.
 */
export function observingListCsv(plan: NetworkPlan, telescopeId: string): string {
	const lines = [OBSERVING_LIST_COLUMNS.join(',')];
	for (const r of observingListRows(plan, telescopeId)) {
		const fields = [
			String(r.order),
			spreadsheetText(r.targetId),
			spreadsheetText(r.name ?? ''),
			r.kind,
			fixed(r.raDeg, 6),
			fixed(r.decDeg, 6),
			r.raHms,
			r.decDms,
			r.startUtc,
			r.endUtc,
			String(r.exposureS),
			spreadsheetText(r.filter ?? ''),
			r.epoch === null ? '' : String(r.epoch),
			fixed(r.airmassStart, 3),
			fixed(r.altitudeStartDeg, 2),
			fixed(r.moonSeparationDeg, 2),
			fixed(r.probability, 8),
			fixed(r.cumulativeProbability, 8)
		];
		lines.push(fields.map(csvField).join(','));
	}
	return lines.join('\r\n') + '\r\n';
}

export interface ObservingListDocument {
	format: 'strainline-observing-list';
	version: 1;
	/** Free text from the caller, e.g. the event and map the plan was made for. */
	label: string | null;
	planStart: string;
	planEnd: string;
	sunAltitudeLimitDeg: number;
	telescope: { id: string; name: string; exposureS: number; slewOverheadS: number; defaultFilter: string | null };
	darkness: { start: string; end: string }[];
	observations: ObservingListRow[];
}

/** The same list as a JSON document (full-precision numbers, camelCase keys, units in the names). */
export function observingListJson(plan: NetworkPlan, telescopeId: string, label: string | null = null): string {
	const t = telescopePlanOf(plan, telescopeId);
	const doc: ObservingListDocument = {
		format: 'strainline-observing-list',
		version: 1,
		label,
		planStart: plan.start,
		planEnd: plan.end,
		sunAltitudeLimitDeg: plan.sunAltitudeLimitDeg,
		telescope: { id: t.telescopeId, name: t.name, exposureS: t.exposureS, slewOverheadS: t.slewOverheadS, defaultFilter: t.defaultFilter },
		darkness: t.darkness,
		observations: t.assignments.map(rowOf)
	};
	return JSON.stringify(doc, null, 2) + '\n';
}
