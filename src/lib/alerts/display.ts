/**
 * How alert quantities are written for people: on the board, the event page and in the duty
 * e-mail. Pure and framework-free so that the server (mail) and the browser (board) agree.
 */

/** Seconds in a Julian year (365.25 d × 86 400 s; IAU definition of the Julian year). */
export const SECONDS_PER_JULIAN_YEAR = 3.15576e7;

export const SOURCE_CLASSES = ['BNS', 'NSBH', 'BBH', 'Terrestrial'] as const;
export type SourceClass = (typeof SOURCE_CLASSES)[number];
export type ClassProbabilities = Partial<Record<SourceClass, number | null>>;

export const KIND_LABELS: Record<string, string> = {
	preliminary: 'Preliminary',
	initial: 'Initial',
	update: 'Update',
	retraction: 'Retraction',
	followup: 'Follow-up'
};

/**
 * False-alarm rate per year from a rate in Hz: `farHz × 3.15576e7` (Julian year, see above).
 * Null stays null.
 */
export function farPerYear(farHz: number | null | undefined): number | null {
	if (farHz === null || farHz === undefined || !Number.isFinite(farHz)) return null;
	return farHz * SECONDS_PER_JULIAN_YEAR;
}

/** Three significant figures, shortest form: 0.000412 → "0.000412", 1234 → "1230", 4.1e-7 → "4.1e-7". */
export function sig3(x: number): string {
	if (x === 0) return '0';
	const p = Number(x.toPrecision(3));
	return Math.abs(p) >= 1e6 || Math.abs(p) < 1e-4 ? p.toExponential() : String(p);
}

/**
 * A false-alarm rate for people: "0.01 per yr (1 in 100 yr)"; rates of one or more a year
 * read "12 per yr". Writing the rare ones as "1 in N yr" is common practice in alert notes.
 */
export function formatFar(farHz: number | null | undefined): string {
	const perYear = farPerYear(farHz);
	if (perYear === null) return 'FAR unknown';
	if (perYear <= 0) return '0 per yr';
	if (perYear >= 1) return `${sig3(perYear)} per yr`;
	const oneIn = 1 / perYear;
	const years = oneIn >= 1e6 ? sig3(oneIn) : oneIn < 10 ? String(Number(oneIn.toFixed(1))) : Math.round(oneIn).toLocaleString('en-GB');
	return `${sig3(perYear)} per yr (1 in ${years} yr)`;
}

/** The most probable source class and its probability, or null without a classification. */
export function dominantClass(classification: ClassProbabilities | null | undefined): { name: SourceClass; probability: number } | null {
	if (!classification) return null;
	let best: { name: SourceClass; probability: number } | null = null;
	for (const name of SOURCE_CLASSES) {
		const p = classification[name];
		if (typeof p !== 'number' || !Number.isFinite(p)) continue;
		if (!best || p > best.probability) best = { name, probability: p };
	}
	return best;
}

/** A probability as a whole percentage ("97%"); "<1%" for small non-zero values. */
export function formatPercent(p: number | null | undefined): string {
	if (typeof p !== 'number' || !Number.isFinite(p)) return '—';
	if (p > 0 && p < 0.005) return '<1%';
	return `${Math.round(p * 100)}%`;
}

/** A covered or enclosed probability: one decimal from 10%, two below, "<0.1%" under a thousandth. */
export function formatProbability(p: number): string {
	return p >= 0.001 ? `${(100 * p).toFixed(p >= 0.1 ? 1 : 2)}%` : p > 0 ? '<0.1%' : '0%';
}

/** A sky area in square degrees: one decimal below 10 deg², whole degrees above. */
export function formatArea(areaDeg2: number | null | undefined): string {
	if (typeof areaDeg2 !== 'number' || !Number.isFinite(areaDeg2)) return '—';
	const text = areaDeg2 < 10 ? areaDeg2.toFixed(1) : Math.round(areaDeg2).toLocaleString('en-GB');
	return `${text} deg²`;
}

/** Luminosity distance "118 ± 24 Mpc" (mean ± standard deviation of the posterior). */
export function formatDistance(distanceMeanMpc: number | null | undefined, distanceStdMpc: number | null | undefined): string {
	if (typeof distanceMeanMpc !== 'number' || !Number.isFinite(distanceMeanMpc)) return '—';
	const mean = Math.round(distanceMeanMpc);
	if (typeof distanceStdMpc !== 'number' || !Number.isFinite(distanceStdMpc)) return `${mean} Mpc`;
	return `${mean} ± ${Math.round(distanceStdMpc)} Mpc`;
}

/** Elapsed time, coarse enough to read at a glance: "42 s", "3 min 05 s", "2 h 07 min", "3 d 4 h". */
export function formatElapsed(ms: number): string {
	const s = Math.max(0, Math.floor(ms / 1000));
	if (s < 60) return `${s} s`;
	const pad = (n: number) => String(n).padStart(2, '0');
	const m = Math.floor(s / 60);
	if (m < 60) return `${m} min ${pad(s % 60)} s`;
	const h = Math.floor(m / 60);
	if (h < 48) return `${h} h ${pad(m % 60)} min`;
	return `${Math.floor(h / 24)} d ${h % 24} h`;
}

/** "42 s since merger", or a warning when the notice's merger time lies ahead of the clock. */
export function describeSinceMerger(ms: number): string {
	if (ms < -60_000) return 'merger time is in the future: check the notice';
	return `${formatElapsed(ms)} since merger`;
}

/**
 * The merger clock of an event: running ("42 s since merger") while it is live, stopped at the
 * retraction once the source has withdrawn it ("stood down 2 h 07 min after the merger").
 */
export function describeMergerClock(eventTime: string | null, nowMs: number, retractedAt: string | null = null): string {
	if (!eventTime) return '—';
	if (retractedAt === null) return describeSinceMerger(nowMs - Date.parse(eventTime));
	const ms = Date.parse(retractedAt) - Date.parse(eventTime);
	return ms >= 0 ? `stood down ${formatElapsed(ms)} after the merger` : 'stood down';
}

/** An instant as "2026-03-01 12:03:04 UTC". */
export function formatUtc(at: Date | string | number | null | undefined): string {
	if (at === null || at === undefined) return '—';
	const d = at instanceof Date ? at : new Date(at);
	if (Number.isNaN(d.getTime())) return '—';
	return d.toISOString().slice(0, 19).replace('T', ' ') + ' UTC';
}
