/**
 * What the astronomy functions take — a site, a fixed target, a local date, a UTC time — and the
 * checks that turn a bad value into a one-line reason (the CLI prints it, forms show it).
 *
 * Pure: no I/O, no framework.
 */

/** Geographic site: geodetic latitude/longitude (east positive) on WGS-84, height above sea level. */
export interface Site {
	latitudeDeg: number;
	longitudeDeg: number;
	elevationM: number;
}

/** A fixed target in ICRS (J2000) equatorial coordinates. */
export interface EquatorialTarget {
	raDeg: number;
	decDeg: number;
}

/** A calendar date with no time zone: interpreted at the site by mean solar time. */
export interface LocalDate {
	year: number;
	month: number;
	day: number;
}

/** Throws `name must be a finite number` unless it is one. */
export function requireFinite(name: string, value: number): void {
	if (typeof value !== 'number' || !Number.isFinite(value)) {
		throw new Error(`${name} must be a finite number, got ${String(value)}`);
	}
}

/** Throws unless the site is on the Earth's surface (or near it). */
export function validateSite(site: Site): void {
	requireFinite('latitude', site.latitudeDeg);
	requireFinite('longitude', site.longitudeDeg);
	requireFinite('elevation', site.elevationM);
	if (site.latitudeDeg < -90 || site.latitudeDeg > 90) {
		throw new Error(`latitude ${site.latitudeDeg} is outside −90…90 degrees`);
	}
	if (site.longitudeDeg < -180 || site.longitudeDeg > 360) {
		throw new Error(`longitude ${site.longitudeDeg} is outside −180…360 degrees (east positive)`);
	}
	// Deeper than the Dead Sea shore or higher than any summit is a typo, not a site.
	if (site.elevationM < -500 || site.elevationM > 9000) {
		throw new Error(`elevation ${site.elevationM} m is outside −500…9000 m`);
	}
}

/** Throws unless RA is in [0, 360] and Dec in [−90, 90] degrees. */
export function validateTarget(target: EquatorialTarget): void {
	requireFinite('ra', target.raDeg);
	requireFinite('dec', target.decDeg);
	if (target.raDeg < 0 || target.raDeg > 360) {
		throw new Error(`ra ${target.raDeg} is outside 0…360 degrees`);
	}
	if (target.decDeg < -90 || target.decDeg > 90) {
		throw new Error(`dec ${target.decDeg} is outside −90…90 degrees`);
	}
}

/** Parses a strict `YYYY-MM-DD` calendar date; throws on anything else (e.g. 2025-02-30). */
export function parseLocalDate(text: string): LocalDate {
	const m = /^(\d{4})-(\d{2})-(\d{2})$/.exec(text ?? '');
	if (!m) throw new Error(`date "${text}" is not of the form YYYY-MM-DD`);
	const [year, month, day] = [Number(m[1]), Number(m[2]), Number(m[3])];
	const probe = new Date(Date.UTC(year, month - 1, day));
	if (probe.getUTCFullYear() !== year || probe.getUTCMonth() !== month - 1 || probe.getUTCDate() !== day) {
		throw new Error(`date "${text}" is not a calendar date`);
	}
	return { year, month, day };
}

/**
 * Parses an ISO-8601 date-time (`YYYY-MM-DDTHH:MM[:SS[.fff]][Z|±HH:MM]`). A time without a zone
 * is read as UTC, since every time this tool prints is UTC.
 */
export function parseUtcTime(text: string): Date {
	const m = /^(\d{4}-\d{2}-\d{2})[T ](\d{2}):(\d{2})(?::(\d{2})(\.\d+)?)?(Z|[+-]\d{2}:?\d{2})?$/i.exec(text ?? '');
	if (!m) throw new Error(`time "${text}" is not an ISO-8601 date-time such as 2026-03-01T04:30:00Z`);
	parseLocalDate(m[1]);
	const [hh, mm, ss] = [Number(m[2]), Number(m[3]), Number(m[4] ?? 0)];
	if (hh > 23 || mm > 59 || ss > 60) throw new Error(`time "${text}" has an out-of-range clock value`);
	const zone = m[6] ? (m[6].toUpperCase() === 'Z' ? 'Z' : m[6].replace(/^([+-]\d{2})(\d{2})$/, '$1:$2')) : 'Z';
	const date = new Date(`${m[1]}T${m[2]}:${m[3]}:${String(ss).padStart(2, '0')}${m[5] ?? ''}${zone}`);
	if (Number.isNaN(date.getTime())) throw new Error(`time "${text}" could not be read`);
	return date;
}
