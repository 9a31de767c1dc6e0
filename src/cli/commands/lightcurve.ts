import { readFileSync } from 'node:fs';
import type { CommandModule } from '../strainline.ts';
import { readPhotometryCsv } from '../../lib/candidates/photometry.ts';
import { summariseLightCurve } from '../../lib/candidates/lightcurve.ts';

const command: CommandModule = {
	summary: 'Per filter: detections, upper limits, fade rate (mag/day, weighted least squares) and first/last detection of a photometry CSV.',
	usage: 'FILE.csv [--json]   (header: time,filter,mag,mag_err,limit)',
	options: {},
	async run(positionals) {
		const [path] = positionals;
		if (!path) throw new Error('missing FILE.csv (photometry with the header time,filter,mag,mag_err,limit)');
		let text: string;
		try {
			text = readFileSync(path, 'utf8');
		} catch (e) {
			throw new Error(`cannot read ${path}: ${(e as NodeJS.ErrnoException).code ?? (e as Error).message}`);
		}
		const filters = summariseLightCurve(readPhotometryCsv(text));
		const rate = (v: number | null, e: number | null) => (v === null ? 'no rate (fewer than 2 detections at different times)' : `${v.toFixed(3)} ± ${e!.toFixed(3)} mag/day`);
		const text2 = [
			`photometry  ${path}`,
			...Object.entries(filters).map(
				([f, s]) =>
					`${f.padEnd(6)} ${String(s.detections).padStart(3)} detections, ${String(s.upperLimits).padStart(3)} upper limits; ${rate(s.rateMagPerDay, s.rateErr)}${s.first ? `; ${s.first} → ${s.last}` : ''}`
			),
			'(rate > 0: fading)'
		].join('\n');
		return { json: { filters }, text: text2 };
	}
};

export default command;
