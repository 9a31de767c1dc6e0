import { readFileSync } from 'node:fs';
import type { CommandModule } from '../strainline.ts';
import { locate, readSkyMap } from '../../lib/sky/index.ts';

function number(name: string, value: string | boolean | undefined, required: boolean): number | undefined {
	if (value === undefined) {
		if (required) throw new Error(`missing --${name}`);
		return undefined;
	}
	const v = typeof value === 'string' && value.trim() !== '' ? Number(value) : NaN;
	if (!Number.isFinite(v)) throw new Error(`--${name} must be a number, got "${String(value)}"`);
	return v;
}

const command: CommandModule = {
	summary: 'Credible level, probability density and distance posterior of one direction in a sky map.',
	usage: 'FILE --ra DEG --dec DEG [--distance MPC] [--json]',
	options: { ra: { type: 'string' }, dec: { type: 'string' }, distance: { type: 'string' } },
	async run(positionals, values) {
		const [path] = positionals;
		if (!path) throw new Error('missing FILE (a HEALPix FITS sky map, optionally .gz)');
		const ra = number('ra', values.ra, true)!;
		const dec = number('dec', values.dec, true)!;
		const distance = number('distance', values.distance, false);
		if (dec < -90 || dec > 90) throw new Error(`--dec must be within [-90, 90], got ${dec}`);
		if (distance !== undefined && !(distance > 0)) throw new Error(`--distance must be positive, got ${distance}`);
		let bytes: Uint8Array;
		try {
			bytes = new Uint8Array(readFileSync(path));
		} catch (e) {
			throw new Error(`cannot read ${path}: ${(e as NodeJS.ErrnoException).code ?? (e as Error).message}`);
		}
		const r = locate(readSkyMap(bytes), ra, dec, distance);
		const json: Record<string, number | null> = {
			credibleLevel: r.credibleLevel,
			probabilityDensity: r.probabilityDensity,
			distanceMean: r.distanceMean,
			distanceStd: r.distanceStd
		};
		if (distance !== undefined) {
			json.dPdV = r.dPdV ?? null;
			json.distanceCdf = r.distanceCdf ?? null;
			json.distancePValue = r.distancePValue ?? null;
		}
		const text = [
			`direction          RA ${ra}°, Dec ${dec}°`,
			`credible level     ${(r.credibleLevel * 100).toFixed(2)}%`,
			`density            ${r.probabilityDensity.toPrecision(6)} per sr`,
			`distance           ${r.distanceMean === null ? 'no distance information' : `${r.distanceMean.toFixed(1)} ± ${r.distanceStd!.toFixed(1)} Mpc`}`,
			...(distance !== undefined
				? [
						`dP/dV at ${distance} Mpc ${r.dPdV === null || r.dPdV === undefined ? 'n/a' : r.dPdV.toPrecision(6) + ' per Mpc³'}`,
						`distance CDF       ${r.distanceCdf === null || r.distanceCdf === undefined ? 'n/a' : r.distanceCdf.toPrecision(6)}`,
						`two-sided p        ${r.distancePValue === null || r.distancePValue === undefined ? 'n/a' : r.distancePValue.toPrecision(6)}`
					]
				: [])
		].join('\n');
		return { json, text };
	}
};

export default command;
