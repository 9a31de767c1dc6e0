/**
 * The sky-map bench's Strainline side, run in a process of its own so that the bench can time it
 * under two memory set-ups in the same run (with and without the app's huge-pages tunable,
 * src/lib/server/platform/app-process.ts): glibc reads GLIBC_TUNABLES only when a process starts.
 *
 * usage: strainline-timing.ts DIR REPEATS WARMUP → prints JSON: per map file (moc.fits, flat.fits)
 * the times of "read + 50/90% areas" and "full analyse", the 90% area; and the memory rows' times
 * for flat.fits. Each timed run reads the file afresh into a new buffer (`readFileSync`, as the app
 * reads a map) and hands the bytes over (`reuseInput`).
 */
import { closeSync, openSync, readFileSync, readSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { analyseSkymap, credibleRegions, readSkyMap } from '../../../src/lib/sky/index.ts';
import { timeRuns } from '../timing.ts';

const [dir, repeatsArg, warmupArg] = process.argv.slice(2);
const repeats = Number(repeatsArg);
const warmup = Number(warmupArg);
const time = (fn: () => void) => timeRuns(fn, repeats, warmup);

const maps: Record<string, { same: number[]; full: number[]; area90: number }> = {};
for (const file of ['moc.fits', 'flat.fits']) {
	const path = join(dir, file);
	let area90 = 0;
	// Same work as the reference: read the file, probability columns only, 50%/90% areas.
	const same = time(() => {
		const map = readSkyMap(readFileSync(path), { skipDistance: true, reuseInput: true });
		area90 = credibleRegions(map, [0.5, 0.9])[1].areaDeg2;
	});
	const full = time(() => analyseSkymap(readFileSync(path), { reuseInput: true }));
	maps[file] = { same, full, area90 };
}

/** What moving the flat map's bytes costs here: the floor under each sky-map figure. */
function memory(path: string) {
	const bytes = statSync(path).size;
	const fresh = time(() => readFileSync(path));
	const warm = Buffer.allocUnsafeSlow(bytes);
	const readWarm = time(() => {
		const fd = openSync(path, 'r');
		try {
			for (let off = 0; off < bytes; ) off += readSync(fd, warm, off, bytes - off, off);
		} finally {
			closeSync(fd);
		}
	});
	const copyTarget = Buffer.allocUnsafeSlow(bytes);
	const copy = time(() => warm.copy(copyTarget));
	const f64 = new Float64Array(warm.buffer, warm.byteOffset, Math.floor(bytes / 8));
	let sink = 0;
	const sum = time(() => {
		let s = 0;
		for (let i = 0; i < f64.length; i++) s += f64[i];
		sink += s;
	});
	const firstTouch = time(() => {
		const b = Buffer.allocUnsafeSlow(bytes);
		for (let i = 0; i < bytes; i += 4096) b[i] = 1;
		sink += b[0];
	});
	// Published so that the loops above cannot be optimised away.
	(globalThis as { benchSink?: number }).benchSink = sink;
	return { bytes, fresh, readWarm, copy, sum, firstTouch };
}

process.stdout.write(JSON.stringify({ tunables: process.env.GLIBC_TUNABLES ?? '', maps, memory: memory(join(dir, 'flat.fits')) }));
