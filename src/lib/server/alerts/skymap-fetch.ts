/**
 * The server's side of sky-map files: fetching one named in a notice under the configured limits
 * (the download itself, with its rules against server-side request forgery, is
 * `skymap-download.ts`, run on the I/O pool), the read options and limits every new map gets, and
 * read errors in words.
 */
import { config } from '../platform/config';
import { runIo } from '../platform/work-pool';
import type { DownloadLimits } from './skymap-download';
import { FitsInflateLimitError, type ReadSkyMapOptions } from '../../sky/index.ts';
import { DEFAULT_MAX_NOTICE_BYTES } from '../../alerts/voevent.ts';
import { maxJsonNoticeBytes, type JsonNoticeOptions } from '../../alerts/notice-json.ts';

/** Options for every read of a newly fetched or uploaded sky map: the server's inflated-size cap. */
export function skymapReadOptions(options: ReadSkyMapOptions = {}): ReadSkyMapOptions {
	return { ...options, maxDecompressedBytes: config.alerts.skymapMaxInflatedBytes };
}

/**
 * Limits for reading a JSON notice: the notice limit for the notice itself, and for the map it
 * carries the same size and inflation caps as a fetched map (SKYMAP_MAX_MB, SKYMAP_MAX_INFLATED_MB).
 */
export function jsonNoticeLimits(): Required<JsonNoticeOptions> {
	return { maxBytes: DEFAULT_MAX_NOTICE_BYTES, maxSkymapBytes: config.alerts.skymapMaxBytes, maxInflatedBytes: config.alerts.skymapMaxInflatedBytes };
}

/** Largest JSON notice the server takes whole (the notice limit plus its largest map in base64). */
export function maxJsonNoticeBytesAllowed(): number {
	return maxJsonNoticeBytes(jsonNoticeLimits());
}

/** Why a sky map could not be read, in words for the event page and the upload form. */
export function skymapReadError(e: unknown): string {
	if (e instanceof FitsInflateLimitError) {
		const mib = Math.round(e.limitBytes / 1048576);
		return `it unpacks to more than ${mib} MiB, the server's limit for a sky map (SKYMAP_MAX_INFLATED_MB; real maps are at most about 200 MB); refused`;
	}
	return e instanceof Error ? e.message : String(e);
}

export { hostAllowance, isPrivateAddress, SkymapFetchError, type SkymapFetchErrorCode } from './skymap-download';

/** Limits that differ from the server's configuration (tests, a retry); `resolveAs` for tests only. */
export type SkymapFetchOptions = Partial<DownloadLimits>;

export interface FetchedSkymap {
	bytes: Buffer;
	finalUrl: string;
	contentType: string | null;
}

/**
 * Download a sky map under the server's limits (or those given), on the I/O pool's thread: the
 * bytes arrive there and move here without a copy. Throws {@link SkymapFetchError}.
 */
export async function fetchSkymap(rawUrl: string, opts: SkymapFetchOptions = {}): Promise<FetchedSkymap> {
	const limits: DownloadLimits = {
		allowedHosts: opts.allowedHosts ?? config.alerts.skymapHosts,
		maxBytes: opts.maxBytes ?? config.alerts.skymapMaxBytes,
		timeoutMs: opts.timeoutMs ?? config.alerts.skymapTimeoutMs,
		maxRedirects: opts.maxRedirects ?? 3,
		resolveAs: opts.resolveAs
	};
	const got = await runIo('downloadSkymap', { url: rawUrl, limits });
	return { bytes: Buffer.from(got.bytes.buffer, got.bytes.byteOffset, got.bytes.byteLength), finalUrl: got.finalUrl, contentType: got.contentType };
}
