/**
 * Benchmark runner: `npm run bench` (= `tsx tests/bench/run.ts [filter]`).
 *
 * Contract for benchmark modules:
 *  - A module is any file `tests/bench/*.bench.ts`; it is imported and its exported
 *    `async function run(): Promise<BenchResult[]>` is awaited. Modules run one after another.
 *  - Each BenchResult names a case and gives the median wall time of Strainline's code
 *    (`strainlineMs`) and, when the module measured one, the median time of an outside
 *    reference implementation doing the same work (`referenceMs`, described by `reference`).
 *  - Modules keep large generated inputs in a temporary directory and delete it afterwards.
 *  - An optional command-line filter runs only modules whose file name contains it.
 * The runner prints one table; "speed-up" = referenceMs / strainlineMs (above 1: Strainline faster).
 */
import { readdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

export interface BenchResult {
	suite: string;
	name: string;
	strainlineMs: number;
	referenceMs?: number;
	reference?: string;
	note?: string;
}

export { median, timeRuns } from './timing.ts';

async function main(): Promise<void> {
	const here = dirname(fileURLToPath(import.meta.url));
	const filter = process.argv[2] ?? '';
	const files = readdirSync(here)
		.filter((f) => f.endsWith('.bench.ts') && f.includes(filter))
		.sort();
	const results: BenchResult[] = [];
	for (const f of files) {
		const mod = (await import(pathToFileURL(join(here, f)).href)) as { run?: () => Promise<BenchResult[]> };
		if (typeof mod.run !== 'function') {
			process.stderr.write(`${f}: no exported run(); skipped\n`);
			continue;
		}
		process.stderr.write(`running ${f}…\n`);
		results.push(...(await mod.run()));
	}
	const rows = results.map((r) => [
		r.suite,
		r.name,
		r.strainlineMs.toFixed(1),
		r.referenceMs === undefined ? '–' : r.referenceMs.toFixed(1),
		r.referenceMs === undefined ? '–' : (r.referenceMs / r.strainlineMs).toFixed(2) + '×',
		r.reference ?? '',
		r.note ?? ''
	]);
	const head = ['suite', 'case', 'strainline ms', 'reference ms', 'speed-up', 'reference', 'note'];
	const widths = head.map((h, k) => Math.max(h.length, ...rows.map((r) => r[k].length)));
	const line = (cells: string[]) => cells.map((c, k) => c.padEnd(widths[k])).join('  ');
	console.log(line(head));
	console.log(widths.map((w) => '-'.repeat(w)).join('  '));
	for (const r of rows) console.log(line(r));
	console.log(`\n${new Date().toISOString()} · node ${process.version} · ${process.platform}/${process.arch}`);
}

main().catch((e) => {
	console.error(e);
	process.exitCode = 1;
});
