/**
 * The I/O pool's tasks: network transfers that must not hold the server's thread. A 100 MB sky map
 * arrives as ~1,500 pieces, each copied into fresh memory; on the server's thread that was about
 * half a second of work in the middle of the night's busiest minute (tests/bench/live.bench.ts),
 * during which live messages waited. Same worker entry as the work pool, on threads of their own
 * (`runIo` in work-pool.ts), so a slow download never keeps a computation waiting. Every limit
 * comes in the input; nothing here reads the configuration or the database.
 */
import { downloadSkymap, SkymapFetchError, type DownloadedSkymap, type DownloadLimits } from '../alerts/skymap-download.ts';

export const IO_TASKS = {
	/** Download a sky-map file under the given limits; the bytes come back moved, not copied. */
	downloadSkymap(input: { url: string; limits: DownloadLimits }): Promise<DownloadedSkymap> {
		return downloadSkymap(input.url, input.limits);
	}
};

export type IoTaskName = keyof typeof IO_TASKS;
export type IoTaskInput<K extends IoTaskName> = Parameters<(typeof IO_TASKS)[K]>[0];
export type IoTaskOutput<K extends IoTaskName> = Awaited<ReturnType<(typeof IO_TASKS)[K]>>;

/** Errors of the I/O tasks rebuilt as their own class on the server's thread. */
export const IO_ERROR_CLASSES: Record<string, new (...args: never[]) => Error> = {
	SkymapFetchError
};
