/**
 * Synthetic galaxy catalogue generator (invented galaxies, for tests, benchmarks and the demo).
 *
 *   tsx seeds/synthetic-catalog.ts --rows 1000000 --max-distance 400 --seed 7 --out file.csv
 *
 * - Positions: uniform in volume inside a sphere of radius R = --max-distance (Mpc): isotropic
 *   directions (z = cos θ uniform in [−1, 1], φ uniform) and r = R · U^{1/3}.
 * - Luminosities: a Schechter function in luminosity, φ(L) dL ∝ (L/L*)^α e^{−L/L*} dL/L*, with the
 *   2dFGRS b_J parameters of Norberg et al. 2002 (MNRAS 336, 907): M* − 5 log10 h = −19.66,
 *   α = −1.21, φ* = 1.61 × 10⁻² h³ Mpc⁻³ (from memory), taken as B band, h = 0.7 ⇒ M* = −20.43.
 *   Sampled between L = 0.01 L* (M ≈ −15.4) and 20 L* by drawing from the truncated power law
 *   x^α and accepting with probability e^{−x}. φ* is not used: --rows sets the number density.
 * - Distance errors: fractional error f uniform in [10%, 20%]; the catalogued distance is the true
 *   one scattered by N(0, f·r), and distance_err = f · (catalogued distance).
 * - weight = L_B in 10^10 L_B,⊙ from b_abs with M_B,⊙ = 5.48 (Binney & Merrifield 1998; from memory);
 *   b_app = b_abs + 5 log10(d_Mpc) + 25.
 * Deterministic for a given seed (mulberry32).
 */
import { createWriteStream } from 'node:fs';
import { parseArgs } from 'node:util';
import { pathToFileURL } from 'node:url';
import { gaussian, mulberry32 } from '../fake-alert-broker/prng.ts';

export const SCHECHTER_B = {
	/** M* for h = 0.7: −19.66 + 5 log10(0.7). */
	mStar: -19.66 + 5 * Math.log10(0.7),
	alpha: -1.21,
	/** φ* in Mpc⁻³ for h = 0.7 (documented, unused by the sampler). */
	phiStarPerMpc3: 1.61e-2 * 0.7 ** 3,
	xMin: 0.01,
	xMax: 20
} as const;

const SUN_ABS_MAG_B = 5.48;

export interface SyntheticCatalogOptions {
	rows: number;
	maxDistanceMpc: number;
	seed: number;
	/** Range of fractional distance errors (default [0.1, 0.2]). */
	errorFraction?: [number, number];
}

export interface SyntheticCatalog {
	rows: number;
	id: string[];
	raDeg: Float64Array;
	decDeg: Float64Array;
	distanceMpc: Float64Array;
	distanceErrMpc: Float64Array;
	bAbs: Float64Array;
}

/** Draw x = L/L* from the Schechter function on [xMin, xMax] (power-law proposal, e^{−x} acceptance). */
export function schechterSample(random: () => number, alpha = SCHECHTER_B.alpha, xMin = SCHECHTER_B.xMin, xMax = SCHECHTER_B.xMax): number {
	const a1 = alpha + 1;
	const lo = xMin ** a1;
	const hi = xMax ** a1;
	for (;;) {
		const x = (lo + random() * (hi - lo)) ** (1 / a1);
		if (random() < Math.exp(-x)) return x;
	}
}

export function generateSyntheticCatalog(options: SyntheticCatalogOptions): SyntheticCatalog {
	const { rows, maxDistanceMpc, seed } = options;
	if (!Number.isInteger(rows) || rows < 1) throw new RangeError('rows must be a positive integer');
	if (!(maxDistanceMpc > 0)) throw new RangeError('max distance must be positive');
	const [fLo, fHi] = options.errorFraction ?? [0.1, 0.2];
	const random = mulberry32(seed);
	const out: SyntheticCatalog = {
		rows,
		id: new Array(rows),
		raDeg: new Float64Array(rows),
		decDeg: new Float64Array(rows),
		distanceMpc: new Float64Array(rows),
		distanceErrMpc: new Float64Array(rows),
		bAbs: new Float64Array(rows)
	};
	const width = String(rows).length;
	for (let k = 0; k < rows; k++) {
		const z = 2 * random() - 1;
		const ra = 360 * random();
		const r = maxDistanceMpc * Math.cbrt(random());
		const f = fLo + (fHi - fLo) * random();
		let d = r * (1 + f * gaussian(random));
		while (!(d > 0.01 * r)) d = r * (1 + f * gaussian(random));
		const x = schechterSample(random);
		out.id[k] = `SYN-${String(k + 1).padStart(width, '0')}`;
		out.raDeg[k] = ra;
		out.decDeg[k] = (Math.asin(z) * 180) / Math.PI;
		out.distanceMpc[k] = d;
		out.distanceErrMpc[k] = f * d;
		out.bAbs[k] = SCHECHTER_B.mStar - 2.5 * Math.log10(x);
	}
	return out;
}

export const CSV_HEADER = 'id,ra,dec,distance,distance_err,weight,b_abs,b_app';

/** CSV text in chunks of `chunkRows` rows; the first chunk starts with a comment line and the header. */
export function* syntheticCatalogCsv(cat: SyntheticCatalog, options: SyntheticCatalogOptions, chunkRows = 10_000): Generator<string> {
	let text =
		`# SYNTHETIC galaxy catalogue (invented, not real galaxies): rows=${cat.rows} max-distance=${options.maxDistanceMpc} Mpc seed=${options.seed}; ` +
		`uniform in volume, Schechter B (Norberg et al. 2002 b_J, h=0.7), weight = L_B / 1e10 L_sun\n${CSV_HEADER}\n`;
	for (let k = 0; k < cat.rows; k++) {
		const d = cat.distanceMpc[k];
		const m = cat.bAbs[k];
		// Values are written rounded; readers (ours and the reference) use the written numbers.
		const weight = 10 ** (-0.4 * (m - SUN_ABS_MAG_B)) / 1e10;
		text += `${cat.id[k]},${cat.raDeg[k].toFixed(6)},${cat.decDeg[k].toFixed(6)},${d.toFixed(3)},${cat.distanceErrMpc[k].toFixed(3)},${weight.toPrecision(6)},${m.toFixed(3)},${(m + 5 * Math.log10(d) + 25).toFixed(3)}\n`;
		if ((k + 1) % chunkRows === 0) {
			yield text;
			text = '';
		}
	}
	if (text) yield text;
}

async function main(argv: string[]): Promise<void> {
	const { values } = parseArgs({
		args: argv,
		options: {
			rows: { type: 'string', default: '100000' },
			'max-distance': { type: 'string', default: '400' },
			seed: { type: 'string', default: '7' },
			out: { type: 'string' }
		}
	});
	const options: SyntheticCatalogOptions = {
		rows: Number(values.rows),
		maxDistanceMpc: Number(values['max-distance']),
		seed: Number(values.seed)
	};
	if (!Number.isInteger(options.rows) || options.rows < 1 || options.rows > 10_000_000) throw new Error('--rows must be an integer in 1..10^7');
	if (!Number.isInteger(options.seed)) throw new Error('--seed must be an integer');
	const cat = generateSyntheticCatalog(options);
	const sink: NodeJS.WritableStream = values.out ? createWriteStream(values.out) : process.stdout;
	for (const chunk of syntheticCatalogCsv(cat, options)) {
		if (!sink.write(chunk)) await new Promise<void>((resolve) => sink.once('drain', () => resolve()));
	}
	if (values.out) await new Promise<void>((resolve) => sink.end(() => resolve()));
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
	main(process.argv.slice(2)).catch((e) => {
		process.stderr.write(`synthetic-catalog: ${(e as Error).message}\n`);
		process.exitCode = 1;
	});
}
