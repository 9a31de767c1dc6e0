import { readFileSync, statSync } from 'node:fs';
import type { CommandModule } from '../strainline.ts';
import { DEFAULT_MAX_SPECTRUM_BYTES, fileSizeProblem, readSpectrum, summariseSpectrum } from '../../lib/candidates/spectrum.ts';

const command: CommandModule = {
	summary: 'Read a spectrum (ASCII 2–3 columns, FITS table, or FITS 1-D image with a linear wavelength axis) and summarise it.',
	usage: `FILE [--max-mb ${DEFAULT_MAX_SPECTRUM_BYTES / 1024 / 1024}] [--json]`,
	options: { 'max-mb': { type: 'string' } },
	async run(positionals, values) {
		const [path] = positionals;
		if (!path) throw new Error('missing FILE (an ASCII or FITS spectrum)');
		const raw = values['max-mb'];
		const maxBytes = raw === undefined ? DEFAULT_MAX_SPECTRUM_BYTES : Number(raw) * 1024 * 1024;
		if (!(maxBytes > 0) || !Number.isFinite(maxBytes)) throw new Error(`--max-mb must be a positive number, got "${String(raw)}"`);
		let bytes: Uint8Array;
		try {
			// Refuse an oversized file before reading it into memory.
			const tooBig = fileSizeProblem(statSync(path).size, maxBytes);
			if (tooBig) throw new Error(`${path}: ${tooBig}`);
			bytes = new Uint8Array(readFileSync(path));
		} catch (e) {
			const code = (e as NodeJS.ErrnoException).code;
			throw code ? new Error(`cannot read ${path}: ${code}`) : e;
		}
		let json;
		try {
			json = summariseSpectrum(readSpectrum(bytes, { maxBytes }));
		} catch (e) {
			throw new Error(`${path}: ${(e as Error).message}`);
		}
		const unit = (u: string | null) => (u === null ? '(unit not stated)' : u);
		const text = [
			`spectrum    ${path}`,
			`points      ${json.points}`,
			`wavelength  ${json.wavelengthMin} – ${json.wavelengthMax} ${unit(json.wavelengthUnit)}`,
			`flux unit   ${unit(json.fluxUnit)}`,
			`errors      ${json.hasErrors ? 'yes' : 'no'}`
		].join('\n');
		return { json, text };
	}
};

export default command;
