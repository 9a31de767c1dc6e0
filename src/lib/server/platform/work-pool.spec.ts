import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { afterAll, describe, expect, it } from 'vitest';
import { readSpectrum, SpectrumError } from '../../candidates/spectrum.ts';
import { FitsInflateLimitError } from '../../sky/fits.ts';
import { readSkyMap } from '../../sky/index.ts';
import { runWork, stopWorkPool, useInlineWork, workerLocation, workThreads } from './work-pool';
import { buffersOf, isShared, ownedBytes, shareArrays } from './work-memory';
import { WORKER_NICENESS } from './work-worker';

const fixture = (path: string) => new Uint8Array(readFileSync(`tests/fixtures/${path}`));

afterAll(async () => {
	useInlineWork(false);
	await stopWorkPool();
});

describe('the work pool', () => {
	it('runs a task on a worker thread, moving the input there and the typed arrays back', async () => {
		const bytes = ownedBytes(fixture('candidates/spectra/ascii-basic.txt'));
		const expected = readSpectrum(bytes.slice());
		const { spectrum, summary } = await runWork('readSpectrum', { bytes, options: {} }, { transfer: [bytes.buffer] });
		// Transferred, not copied: the caller's buffer is detached.
		expect(bytes.buffer.byteLength).toBe(0);
		expect(Array.from(spectrum.wavelength)).toEqual(Array.from(expected.wavelength));
		expect(Array.from(spectrum.flux)).toEqual(Array.from(expected.flux));
		expect(spectrum.wavelength).toBeInstanceOf(Float64Array);
		expect(summary.points).toBe(expected.wavelength.length);
	});

	it("gives back a pure module's error as its own class, with its fields", async () => {
		const bad = fixture('candidates/spectra/bad-one-column.txt');
		const local = (() => {
			try {
				readSpectrum(bad.slice());
			} catch (e) {
				return e as Error;
			}
		})()!;
		const remote = (await runWork('readSpectrum', { bytes: bad, options: {} }).catch((e: unknown) => e)) as Error;
		expect(remote).toBeInstanceOf(SpectrumError);
		expect(remote.message).toBe(local.message);

		const gz = fixture('sky/moc_map.fits.gz');
		const limited = await runWork('readSkyMap', { bytes: gz, read: { maxDecompressedBytes: 1000 } }).catch((e: unknown) => e as FitsInflateLimitError);
		expect(limited).toBeInstanceOf(FitsInflateLimitError);
		expect((limited as FitsInflateLimitError).limitBytes).toBe(1000);
	});

	it('refuses a task name it does not know, in words', async () => {
		// @ts-expect-error: not a task
		await expect(runWork('noSuchTask', {})).rejects.toThrow('the work pool has no task named "noSuchTask"');
	});

	it('returns a parsed sky map in shared memory, equal to one read on this thread', async () => {
		const bytes = fixture('sky/moc_map.fits');
		const here = readSkyMap(bytes);
		const there = await runWork('readSkyMap', { bytes });
		expect(isShared(there)).toBe(true);
		expect(isShared(here)).toBe(false);
		expect(there.size).toBe(here.size);
		expect(Array.from(there.probDensity.subarray(0, 100))).toEqual(Array.from(here.probDensity.subarray(0, 100)));
		expect(there.probDensity.reduce((a, b) => a + b, 0)).toBe(here.probDensity.reduce((a, b) => a + b, 0));
	});

	it('runs the same tasks on the calling thread only when a test asks for it', async () => {
		useInlineWork(true);
		const bytes = ownedBytes(fixture('candidates/spectra/ascii-basic.txt'));
		const { summary } = await runWork('readSpectrum', { bytes, options: {} }, { transfer: [bytes.buffer] });
		expect(bytes.buffer.byteLength).toBeGreaterThan(0);
		expect(summary.points).toBeGreaterThan(0);
		useInlineWork(false);
	});

	it.runIf(existsSync('/proc/thread-self'))('runs its threads nicer than the server\'s thread, which keeps its priority', async () => {
		const bytes = ownedBytes(fixture('candidates/spectra/ascii-basic.txt'));
		await runWork('readSpectrum', { bytes, options: {} }, { transfer: [bytes.buffer] });
		// Field 19 of /proc/<pid>/task/<tid>/stat is the thread's nice value (proc(5)); the command name may hold spaces, so count after its ')'.
		const niceOf = (tid: string) => Number(readFileSync(`/proc/self/task/${tid}/stat`, 'utf8').split(') ')[1].split(' ')[16]);
		const tids = readdirSync('/proc/self/task');
		expect(niceOf(String(process.pid))).toBe(0);
		expect(tids.filter((t) => niceOf(t) === WORKER_NICENESS).length).toBeGreaterThanOrEqual(1);
	});

	it('leaves one core to the event loop', () => {
		expect([workThreads(1), workThreads(2), workThreads(8)]).toEqual([1, 1, 7]);
		expect(workerLocation().filename).toMatch(/work-worker-source\.js$/);
	});
});

describe('moving typed arrays between threads', () => {
	it('transfers only buffers a view spans whole, and shares on request', () => {
		const whole = new Float64Array(4);
		const big = new Uint8Array(100);
		const part = big.subarray(10, 20);
		expect(buffersOf({ a: whole, b: [part, { c: whole }], d: 'x' })).toEqual([whole.buffer]);
		const own = ownedBytes(part);
		expect(own).not.toBe(part);
		expect(own.buffer.byteLength).toBe(10);
		expect(ownedBytes(big)).toBe(big);
		const shared = shareArrays({ whole, list: [{ part }], n: 3, names: ['a'] });
		expect(shared.whole.buffer).toBeInstanceOf(SharedArrayBuffer);
		expect(shared.list[0].part.length).toBe(10);
		expect(shared.names).toEqual(['a']);
		expect(buffersOf(shared)).toEqual([]);
	});
});
