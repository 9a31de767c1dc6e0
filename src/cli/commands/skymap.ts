import { readFileSync } from 'node:fs';
import type { CommandModule } from '../strainline.ts';
import { analyseSkymap } from '../../lib/sky/index.ts';

function readInput(path: string | undefined): Uint8Array {
	if (!path) throw new Error('missing FILE (a HEALPix FITS sky map, optionally .gz)');
	try {
		return new Uint8Array(readFileSync(path));
	} catch (e) {
		throw new Error(`cannot read ${path}: ${(e as NodeJS.ErrnoException).code ?? (e as Error).message}`);
	}
}

const round = (v: number, digits: number) => Number(v.toFixed(digits));

const command: CommandModule = {
	summary: 'Summarise a HEALPix sky map: 50%/90% credible areas (deg²), distance (Mpc), peak.',
	usage: 'FILE [--json]',
	options: {},
	async run(positionals) {
		const [path] = positionals;
		const s = analyseSkymap(readInput(path));
		const json = {
			area50: s.area50,
			area90: s.area90,
			distanceMean: s.distanceMean,
			distanceStd: s.distanceStd,
			pixels: s.pixels,
			maxOrder: s.maxOrder,
			probabilitySum: s.probabilitySum,
			peak: { ra: s.peak.ra, dec: s.peak.dec }
		};
		const text = [
			`sky map     ${path} (${s.ordering}, ${s.pixels} pixels, max order ${s.maxOrder})`,
			`area 50%    ${round(s.area50, 2)} deg²`,
			`area 90%    ${round(s.area90, 2)} deg²`,
			`distance    ${s.distanceMean === null ? 'no distance information' : `${round(s.distanceMean, 1)} ± ${round(s.distanceStd!, 1)} Mpc`}`,
			`peak        RA ${round(s.peak.ra, 4)}°, Dec ${round(s.peak.dec, 4)}°`,
			`probability ${s.probabilitySum.toPrecision(8)} (as read)`,
			...s.warnings.map((w) => `warning     ${w}`)
		].join('\n');
		return { json, text };
	}
};

export default command;
