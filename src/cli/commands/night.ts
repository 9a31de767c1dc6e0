/**
 * `strainline night --lat --lon --elevation --date YYYY-MM-DD [--ra --dec --min-altitude]`
 * Sun and Moon for the night that begins on the evening of a local date at a site.
 */
import { nightWindow, observableWindow } from '../../lib/targeting/night.ts';
import { parseLocalDate, type Site, validateSite } from '../../lib/targeting/observing-inputs.ts';
import type { CommandModule } from '../strainline.ts';

type Values = Record<string, string | boolean | undefined>;

/** Reads a string option or throws `missing --name`. Shared with the altaz command. */
export function requireString(values: Values, name: string): string {
	const v = values[name];
	if (typeof v !== 'string' || v.trim() === '') throw new Error(`missing --${name}`);
	return v.trim();
}

/** Reads a numeric option, or undefined when absent; throws when it is not a number. */
export function optionalNumber(values: Values, name: string): number | undefined {
	const v = values[name];
	if (v === undefined) return undefined;
	if (typeof v !== 'string' || !/^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/.test(v.trim())) {
		throw new Error(`--${name} must be a number in degrees/metres, got "${String(v)}"`);
	}
	return Number(v);
}

export function requireNumber(values: Values, name: string): number {
	const v = optionalNumber(values, name);
	if (v === undefined) throw new Error(`missing --${name}`);
	return v;
}

/** `2026-03-01T04:30:12.345Z` → `2026-03-01 04:30:12`. */
/** The site options shared by `night` and `altaz`, checked. */
export function readSite(values: Values): Site {
	const site: Site = {
		latitudeDeg: requireNumber(values, 'lat'),
		longitudeDeg: requireNumber(values, 'lon'),
		elevationM: optionalNumber(values, 'elevation') ?? 0
	};
	validateSite(site);
	return site;
}

export function formatUtc(isoTime: string): string {
	return isoTime.replace('T', ' ').replace(/\.\d+Z$|Z$/, '');
}

const command: CommandModule = {
	summary:
		'Sunset, sunrise, twilights (Sun centre at −0.833°, −12°, −18°) and Moon illumination for the night that begins on the evening of a local date (mean solar time at the site).',
	usage: '--lat DEG --lon DEG [--elevation M] --date YYYY-MM-DD [--ra DEG --dec DEG [--min-altitude DEG]] [--json]',
	options: {
		lat: { type: 'string' },
		lon: { type: 'string' },
		elevation: { type: 'string' },
		date: { type: 'string' },
		ra: { type: 'string' },
		dec: { type: 'string' },
		'min-altitude': { type: 'string' }
	},
	async run(_positionals, values) {
		const site = readSite(values);
		const date = parseLocalDate(requireString(values, 'date'));
		const night = nightWindow(site, date);

		const ra = optionalNumber(values, 'ra');
		const dec = optionalNumber(values, 'dec');
		if ((ra === undefined) !== (dec === undefined)) throw new Error('give both --ra and --dec, or neither');
		const minAltitudeDeg = optionalNumber(values, 'min-altitude') ?? 30;
		const window = ra !== undefined && dec !== undefined ? observableWindow(site, { raDeg: ra, decDeg: dec }, night, minAltitudeDeg) : null;

		const json = {
			sunset: night.sunset.evening,
			sunrise: night.sunset.morning,
			eveningTwilight: night.astronomical.evening,
			morningTwilight: night.astronomical.morning,
			moonIllumination: night.moon.illumination,
			eveningNauticalTwilight: night.nautical.evening,
			morningNauticalTwilight: night.nautical.morning,
			darkHours: night.darkness?.hours ?? 0,
			darkStart: night.darkness?.start ?? null,
			darkEnd: night.darkness?.end ?? null,
			reasons: {
				sunset: night.sunset.reason,
				nauticalTwilight: night.nautical.reason,
				astronomicalTwilight: night.astronomical.reason
			},
			midpoint: night.midpoint,
			solarMidnight: night.solarMidnight,
			localMeanNoon: night.localMeanNoon,
			sunMinAltitude: night.sunMinAltitudeDeg,
			moon: {
				illumination: night.moon.illumination,
				phaseAngle: night.moon.phaseAngleDeg,
				waxing: night.moon.waxing,
				ra: night.moon.raDeg,
				dec: night.moon.decDeg,
				altitude: night.moon.altitudeDeg,
				azimuth: night.moon.azimuthDeg
			},
			site: { lat: site.latitudeDeg, lon: site.longitudeDeg, elevation: site.elevationM },
			date: night.date,
			...(window && ra !== undefined && dec !== undefined
				? {
						target: {
							ra,
							dec,
							minAltitude: window.minAltitudeDeg,
							windows: window.intervals.map((w) => ({ start: w.start, end: w.end, hours: w.hours, startsBy: w.startsBy, endsBy: w.endsBy })),
							totalHours: window.totalHours,
							maxAltitude: window.maxAltitudeDeg,
							maxAltitudeAt: window.maxAltitudeAt,
							reason: window.reason
						}
					}
				: {})
		};

		const line = (label: string, value: string | null, reason: string | null) =>
			`  ${label.padEnd(30)}${value ? formatUtc(value) : `—  (${reason ?? 'not found'})`}`;
		const text = [
			`Night of ${night.date} at lat ${site.latitudeDeg}°, lon ${site.longitudeDeg}°, ${site.elevationM} m (times UTC)`,
			line('sunset (−0.833°)', night.sunset.evening, night.sunset.reason),
			line('evening nautical (−12°)', night.nautical.evening, night.nautical.reason),
			line('evening astronomical (−18°)', night.astronomical.evening, night.astronomical.reason),
			line('morning astronomical (−18°)', night.astronomical.morning, night.astronomical.reason),
			line('morning nautical (−12°)', night.nautical.morning, night.nautical.reason),
			line('sunrise (−0.833°)', night.sunset.morning, night.sunset.reason),
			`  ${'astronomical darkness'.padEnd(30)}${(night.darkness?.hours ?? 0).toFixed(2)} h`,
			`  ${'Moon at midpoint'.padEnd(30)}${(100 * night.moon.illumination).toFixed(1)}% lit, ${night.moon.waxing ? 'waxing' : 'waning'}, altitude ${night.moon.altitudeDeg.toFixed(1)}°, RA ${night.moon.raDeg.toFixed(2)}°, Dec ${night.moon.decDeg.toFixed(2)}°  (${formatUtc(night.midpoint)})`,
			...(window
				? [
						`  target RA ${ra}°, Dec ${dec}° above ${window.minAltitudeDeg}° in darkness: ` +
							(window.intervals.length
								? window.intervals.map((w) => `${formatUtc(w.start)} → ${formatUtc(w.end)} (${w.hours.toFixed(2)} h)`).join('; ')
								: `never (${window.reason})`)
					]
				: [])
		].join('\n');
		return { json, text };
	}
};

export default command;
