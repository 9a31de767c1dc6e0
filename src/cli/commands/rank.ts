import { createReadStream, readFileSync } from 'node:fs';
import type { CommandModule } from '../strainline.ts';
import { readSkyMap } from '../../lib/sky/index.ts';
import { parseCatalogCsvStream, parseColumnMapping } from '../../lib/targeting/catalog-csv.ts';
import { buildCatalogIndex, rankGalaxies } from '../../lib/targeting/galaxies.ts';

async function readCatalog(path: string, columns: string | undefined) {
	let readError: Error | null = null;
	async function* chunks(): AsyncGenerator<string> {
		try {
			for await (const chunk of createReadStream(path, { encoding: 'utf8', highWaterMark: 1 << 20 })) yield chunk as string;
		} catch (e) {
			readError = e as Error;
			throw e;
		}
	}
	const r = await parseCatalogCsvStream(chunks(), { columns: columns ? parseColumnMapping(columns) : {} });
	if (readError) throw new Error(`cannot read ${path}: ${(readError as NodeJS.ErrnoException).code ?? (readError as Error).message}`);
	if (r.fatal) throw new Error(`catalogue ${path}: ${r.fatal}`);
	if (!r.ok || !r.catalog) {
		const first = r.rejected.rows[0];
		throw new Error(`catalogue ${path}: ${r.rejected.count} invalid row(s); first at line ${first.line}: ${first.reason}`);
	}
	return r.catalog;
}

const command: CommandModule = {
	summary: 'Rank catalogue galaxies inside a sky map’s credible region by 3-D probability × luminosity.',
	usage: 'FILE --catalog CSV [--limit N] [--level 0.99] [--columns id=NAME,ra=RAJ2000,...] [--json]',
	options: { catalog: { type: 'string' }, limit: { type: 'string' }, level: { type: 'string' }, columns: { type: 'string' } },
	async run(positionals, values) {
		const [path] = positionals;
		if (!path) throw new Error('missing FILE (a HEALPix FITS sky map, optionally .gz)');
		if (typeof values.catalog !== 'string') throw new Error('missing --catalog CSV');
		const limit = values.limit === undefined ? 100 : Number(values.limit);
		if (!Number.isInteger(limit) || limit < 1) throw new Error(`--limit must be a positive integer, got "${String(values.limit)}"`);
		const level = values.level === undefined ? 0.99 : Number(values.level);
		if (!(level > 0 && level <= 1)) throw new Error(`--level must be in (0, 1], got "${String(values.level)}"`);
		let bytes: Uint8Array;
		try {
			bytes = new Uint8Array(readFileSync(path));
		} catch (e) {
			throw new Error(`cannot read ${path}: ${(e as NodeJS.ErrnoException).code ?? (e as Error).message}`);
		}
		const map = readSkyMap(bytes);
		const catalog = await readCatalog(values.catalog, typeof values.columns === 'string' ? values.columns : undefined);
		const r = rankGalaxies(map, buildCatalogIndex(catalog), { level, limit });
		const galaxies = r.galaxies.map((g) => ({
			id: g.id,
			ra: g.ra,
			dec: g.dec,
			distance: g.distance,
			score: g.score,
			probability: g.probability,
			cumulative: g.cumulative
		}));
		const head = `${r.candidates} galaxies in the ${(level * 100).toFixed(0)}% region (${r.regionAreaDeg2.toFixed(1)} deg²), ranked ${r.mode === '3d' ? 'by dP/dV × weight' : 'by 2-D density × weight (map has no distance)'}` +
			(r.withoutDistance ? `; ${r.withoutDistance} in pixels without distance, not ranked` : '') +
			(r.completeness ? `; catalogue B luminosity ${(r.completeness.ratio * 100).toPrecision(2)}% of the expected luminosity density × region volume` : '');
		const rows = galaxies.map((g, k) =>
			[String(k + 1).padStart(5), g.id.padEnd(14), g.ra.toFixed(4).padStart(9), g.dec.toFixed(4).padStart(9), g.distance.toFixed(1).padStart(8), g.score.toExponential(3).padStart(11), (g.probability * 100).toFixed(2).padStart(7), (g.cumulative * 100).toFixed(2).padStart(7)].join('  ')
		);
		const title = ['rank'.padStart(5), 'id'.padEnd(14), 'RA °'.padStart(9), 'Dec °'.padStart(9), 'd Mpc'.padStart(8), 'score'.padStart(11), 'prob %'.padStart(7), 'cum %'.padStart(7)].join('  ');
		return { json: { galaxies }, text: [head, title, ...rows].join('\n') };
	}
};

export default command;
