/**
 * `strainline altaz --lat --lon --elevation --time ISO --ra R --dec D [--refraction]`
 * Altitude, azimuth, airmass, hour angle and sidereal time of an ICRS direction at a site.
 */
import { airmassKastenYoung1989, greenwichApparentSiderealTimeHours, greenwichMeanSiderealTimeHours, localSiderealTimeHours, targetAltAz } from '../../lib/targeting/apparent-place.ts';
import { parseUtcTime, type Site, validateSite, validateTarget } from '../../lib/targeting/observing-inputs.ts';
import { moonPhase, moonPosition, moonSeparationDeg, sunAvoidance, sunPosition, sunSeparationDeg } from '../../lib/targeting/sun-moon.ts';
import type { CommandModule } from '../strainline.ts';
import { formatUtc, optionalNumber, readSite, requireNumber, requireString } from './night.ts';

/** Default solar-elongation limit; a placeholder of common practice, set per telescope. */
const DEFAULT_MIN_SUN_ELONGATION_DEG = 45;

function hms(hours: number): string {
	const totalMs = Math.round(hours * 3_600_000);
	const h = Math.floor(totalMs / 3_600_000);
	const m = Math.floor((totalMs % 3_600_000) / 60_000);
	const s = (totalMs % 60_000) / 1000;
	return `${String(h).padStart(2, '0')}h${String(m).padStart(2, '0')}m${s.toFixed(3).padStart(6, '0')}s`;
}

const command: CommandModule = {
	summary:
		'Altitude (geometric unless --refraction), azimuth (east of north), airmass (Kasten & Young 1989 on the apparent altitude), hour angle and sidereal time of an ICRS/J2000 direction.',
	usage: '--lat DEG --lon DEG [--elevation M] --time ISO --ra DEG --dec DEG [--refraction] [--min-sun-elongation DEG] [--json]',
	options: {
		lat: { type: 'string' },
		lon: { type: 'string' },
		elevation: { type: 'string' },
		time: { type: 'string' },
		ra: { type: 'string' },
		dec: { type: 'string' },
		refraction: { type: 'boolean' },
		'min-sun-elongation': { type: 'string' }
	},
	async run(_positionals, values) {
		const site = readSite(values);
		const target = { raDeg: requireNumber(values, 'ra'), decDeg: requireNumber(values, 'dec') };
		validateTarget(target);
		const time = parseUtcTime(requireString(values, 'time'));
		const refraction = values.refraction === true;
		const minElongationDeg = optionalNumber(values, 'min-sun-elongation') ?? DEFAULT_MIN_SUN_ELONGATION_DEG;

		const pos = targetAltAz(site, target, time, { refraction });
		const sun = sunPosition(site, time);
		const moon = moonPosition(site, time);
		const phase = moonPhase(time);
		const avoidance = sunAvoidance(target, time, minElongationDeg);
		const gmst = greenwichMeanSiderealTimeHours(time);
		const gast = greenwichApparentSiderealTimeHours(time);
		const last = localSiderealTimeHours(time, site.longitudeDeg, 'apparent');
		const lmst = localSiderealTimeHours(time, site.longitudeDeg, 'mean');
		const moonSep = moonSeparationDeg(site, target, time);
		const sunSep = sunSeparationDeg(target, time, site);
		// Re-derived here so the printed formula and the number cannot drift apart.
		const airmass = airmassKastenYoung1989(pos.apparentAltitudeDeg);

		const json = {
			altitude: pos.altitudeDeg,
			azimuth: pos.azimuthDeg,
			airmass,
			refraction,
			geometricAltitude: pos.geometricAltitudeDeg,
			apparentAltitude: pos.apparentAltitudeDeg,
			airmassFormula: 'Kasten & Young (1989) on the apparent altitude (geometric + Saemundsson standard refraction); null below the horizon',
			hourAngleHours: pos.hourAngleHours,
			raOfDate: pos.raOfDateDeg,
			decOfDate: pos.decOfDateDeg,
			gmstHours: gmst,
			gastHours: gast,
			lmstHours: lmst,
			lastHours: last,
			moonSeparation: moonSep,
			moonIllumination: phase.illumination,
			moonAltitude: moon.altitudeDeg,
			sunSeparation: sunSep,
			sunAltitude: sun.altitudeDeg,
			sunAvoidance: { ok: avoidance.ok, minElongation: avoidance.minElongationDeg, elongation: avoidance.elongationDeg, reason: avoidance.reason },
			time: time.toISOString(),
			ra: target.raDeg,
			dec: target.decDeg,
			site: { lat: site.latitudeDeg, lon: site.longitudeDeg, elevation: site.elevationM }
		};

		const f = (x: number, d = 3) => x.toFixed(d);
		const text = [
			`RA ${target.raDeg}°, Dec ${target.decDeg}° at ${formatUtc(time.toISOString())} UTC from lat ${site.latitudeDeg}°, lon ${site.longitudeDeg}°, ${site.elevationM} m`,
			`  altitude   ${f(pos.altitudeDeg)}° (${refraction ? 'with standard refraction' : 'geometric, no refraction'}); geometric ${f(pos.geometricAltitudeDeg)}°, apparent ${f(pos.apparentAltitudeDeg)}°`,
			`  azimuth    ${f(pos.azimuthDeg)}° (east of north)`,
			`  airmass    ${airmass === null ? 'none (below the horizon)' : f(airmass)}  (Kasten & Young 1989, apparent altitude)`,
			`  hour angle ${pos.hourAngleHours >= 0 ? '+' : ''}${f(pos.hourAngleHours, 4)} h`,
			`  sidereal   GMST ${hms(gmst)}  GAST ${hms(gast)}  LMST ${hms(lmst)}  LAST ${hms(last)}`,
			`  Moon       ${f(moonSep, 2)}° away, ${(100 * phase.illumination).toFixed(1)}% lit, altitude ${f(moon.altitudeDeg, 1)}°`,
			`  Sun        ${f(sunSep, 2)}° away, altitude ${f(sun.altitudeDeg, 1)}°; ${avoidance.ok ? 'OK' : 'AVOID'}: ${avoidance.reason}`
		].join('\n');
		return { json, text };
	}
};

export default command;
