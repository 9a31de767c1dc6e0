/**
 * How the report's numbers are written, shared by the page, the Markdown, the bulletin and the
 * PDF so that every rendering says the same thing.
 */

/** A fraction 0–1 as a percentage with one decimal ("42.3%"); "—" for null. */
export function pct(x: number | null | undefined, digits = 1): string {
	return x === null || x === undefined || !Number.isFinite(x) ? '—' : `${(x * 100).toFixed(digits)}%`;
}

/** A duration in seconds for people: "42 s", "17 min", "3.2 h", "2.1 d"; "—" for null. */
export function duration(seconds: number | null | undefined): string {
	if (seconds === null || seconds === undefined || !Number.isFinite(seconds)) return '—';
	const sign = seconds < 0 ? '−' : '';
	const s = Math.abs(seconds);
	if (s < 90) return `${sign}${Math.round(s)} s`;
	if (s < 90 * 60) return `${sign}${Math.round(s / 60)} min`;
	if (s < 48 * 3600) return `${sign}${(s / 3600).toFixed(1)} h`;
	return `${sign}${(s / 86400).toFixed(1)} d`;
}

/** ISO time as "2026-03-01 04:00:12 UTC"; "—" for null. */
export function utc(iso: string | null | undefined): string {
	if (!iso) return '—';
	return `${iso.slice(0, 19).replace('T', ' ')} UTC`;
}

/** A number with fixed decimals, "—" for null. */
export function num(x: number | null | undefined, digits = 1): string {
	return x === null || x === undefined || !Number.isFinite(x) ? '—' : x.toFixed(digits);
}

/** A magnitude difference with its sign: "+1.2", "−0.4". */
export function signedMag(x: number | null | undefined): string {
	if (x === null || x === undefined || !Number.isFinite(x)) return '—';
	return `${x >= 0 ? '+' : '−'}${Math.abs(x).toFixed(1)}`;
}

/** Exposure in seconds for people: "300 s", "1.5 h". */
export function exposure(seconds: number): string {
	return seconds < 3600 ? `${Math.round(seconds)} s` : `${(seconds / 3600).toFixed(1)} h`;
}
