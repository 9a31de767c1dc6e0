/**
 * Galaxy-ranking benchmark: a 10⁶-galaxy synthetic catalogue (seeds/synthetic-catalog.ts) ranked
 * against two invented multi-order maps (fake-alert-broker/skymap.ts): one Fisher blob with a 90%
 * area of ~30 deg² and one of ~1,000 deg², 99% region ranked. The catalogue index is built once
 * (timed separately). Reference in the same run: tests/bench/targeting/reference.py, numpy/healpy
 * crossmatching the whole catalogue (ang2pix for every galaxy, score, sort). Inputs in a temp dir.
 */
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { generateSkymap, skymapToFits } from '../../fake-alert-broker/skymap.ts';
import { generateSyntheticCatalog, syntheticCatalogCsv } from '../../seeds/synthetic-catalog.ts';
import { readSkyMap, summarise } from '../../src/lib/sky/index.ts';
import { parseCatalogCsvStream } from '../../src/lib/targeting/catalog-csv.ts';
import { buildCatalogIndex, rankGalaxies } from '../../src/lib/targeting/galaxies.ts';
import { median, timeRuns, type BenchResult } from './run.ts';

const PYTHON = '/usr/bin/python3';
const ROWS = 1_000_000;
const REPEATS = 7;
const WARMUP = 2;

const time = (fn: () => void) => timeRuns(fn, REPEATS, WARMUP);

export async function run(): Promise<BenchResult[]> {
	const here = dirname(fileURLToPath(import.meta.url));
	const dir = mkdtempSync(join(tmpdir(), 'strainline-ranking-bench-'));
	try {
		const options = { rows: ROWS, maxDistanceMpc: 400, seed: 7 };
		const synthetic = generateSyntheticCatalog(options);
		const tParse = performance.now();
		const parsed = await parseCatalogCsvStream(syntheticCatalogCsv(synthetic, options, 20_000));
		const parseMs = performance.now() - tParse;
		if (!parsed.ok || !parsed.catalog) throw new Error('benchmark catalogue did not parse');
		const catalog = parsed.catalog;
		const raw: Record<string, Float64Array> = {
			ra: catalog.raDeg,
			dec: catalog.decDeg,
			dist: catalog.distanceMpc,
			err: catalog.distanceErrMpc,
			weight: catalog.weight
		};
		for (const [k, v] of Object.entries(raw)) writeFileSync(join(dir, `${k}.f64`), new Uint8Array(v.buffer, v.byteOffset, v.byteLength));

		const builds: number[] = [];
		let index = buildCatalogIndex(catalog);
		for (let k = 0; k < 3; k++) {
			const t0 = performance.now();
			index = buildCatalogIndex(catalog);
			builds.push(performance.now() - t0);
		}
		const results: BenchResult[] = [
			{ suite: 'ranking', name: `index build, ${ROWS.toLocaleString('en')} galaxies (order 8)`, strainlineMs: median(builds), note: `CSV parse of the same rows: ${parseMs.toFixed(0)} ms (once)` }
		];

		for (const [label, widthDeg] of [
			['~30 deg² map', 1.44],
			['~1,000 deg² map', 8.3]
		] as const) {
			const m = generateSkymap({ components: [{ raDeg: 210, decDeg: 25, widthDeg }], distance: { meanMpc: 180, stdMpc: 50 } });
			const file = join(dir, `map-${widthDeg}.fits.gz`);
			writeFileSync(file, skymapToFits(m, { object: 'S-demo-bench', dateObs: '2026-01-01T00:00:00' }));
			const map = readSkyMap(new Uint8Array(readFileSync(file)));
			const s = summarise(map);
			let r = rankGalaxies(map, index);
			const ms = time(() => {
				r = rankGalaxies(map, index);
			});
			const ref = JSON.parse(execFileSync(PYTHON, [join(here, 'targeting', 'reference.py'), file, dir, String(ROWS), String(REPEATS)], { encoding: 'utf8', maxBuffer: 1 << 24 })) as {
				ms: number[];
				candidates: number;
				top: number[];
				prob0: number;
			};
			const sameTop = r.galaxies.slice(0, ref.top.length).every((g, k) => g.row === ref.top[k]);
			results.push({
				suite: 'ranking',
				name: `rank 10⁶ galaxies, ${label} (90% ${s.area90.toFixed(0)} deg², 99% ${s.area99.toFixed(0)} deg², ${map.size} px)`,
				strainlineMs: median(ms),
				referenceMs: median(ref.ms),
				reference: 'numpy/healpy full crossmatch + score + sort',
				note: `${r.candidates} candidates (ref ${ref.candidates}), examined ${r.examined}, top-20 ${sameTop ? 'identical' : 'DIFFER'}, p1 diff ${Math.abs(r.galaxies[0].probability - ref.prob0).toExponential(1)}; runs ${ms.map((v) => v.toFixed(0)).join('/')}`
			});
		}
		return results;
	} finally {
		rmSync(dir, { recursive: true, force: true });
	}
}
