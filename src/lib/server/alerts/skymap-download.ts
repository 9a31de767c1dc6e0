/**
 * Download a sky-map file under the rules that keep a notice from turning the server into a proxy
 * (server-side request forgery): the host must be allow-listed, only http/https, redirects only to
 * the same host, a deadline for the whole transfer, a size cap, and a host that is allow-listed
 * only by domain (".example.org") may not resolve to a private, loopback or link-local address
 * (DNS rebinding: the address checked is the one connected to).
 *
 * Every limit is passed in (nothing here reads the configuration), so the download runs on a
 * thread of the I/O pool (`io-tasks.ts`): a 100 MB map's pieces, their copying and the fresh
 * memory they fill then never hold the server's thread (`skymap-fetch.ts` is the server's side).
 */
import dns from 'node:dns';
import http from 'node:http';
import https from 'node:https';
import net from 'node:net';
import { DomainError } from '../platform/errors.ts';
import { ByteCollector } from '../platform/byte-collector.ts';

export type SkymapFetchErrorCode =
	| 'bad_url'
	| 'scheme'
	| 'host_not_allowed'
	| 'private_address'
	| 'redirect'
	| 'too_large'
	| 'timeout'
	| 'http_status'
	| 'network';

/** A sky map that could not be fetched: 502, since the fault lies upstream (the notice's URL, the sky-map server or the way to it), never with whoever asked. */
export class SkymapFetchError extends DomainError {
	override name = 'SkymapFetchError';
	constructor(
		override readonly code: SkymapFetchErrorCode,
		message: string
	) {
		super(502, code, message);
	}
}

type LookupFn = (hostname: string, cb: (err: Error | null, addresses: { address: string; family: number }[]) => void) => void;

/** Limits of one download, all given (the server fills them from its configuration). */
export interface DownloadLimits {
	allowedHosts: string[];
	maxBytes: number;
	timeoutMs: number;
	maxRedirects: number;
	/**
	 * Names answered from this table instead of the system resolver (tests: a name that resolves to
	 * loopback). Data, not a function, so that it reaches the I/O thread.
	 */
	resolveAs?: Record<string, { address: string; family: number }[]>;
}

export interface DownloadedSkymap {
	/** Owns its whole buffer, so it moves between threads without a copy. */
	bytes: Uint8Array;
	finalUrl: string;
	contentType: string | null;
}

const systemLookup: LookupFn = (hostname, cb) => dns.lookup(hostname, { all: true, verbatim: true }, (err, addrs) => cb(err, addrs ?? []));

function resolverOf(table: DownloadLimits['resolveAs']): LookupFn {
	if (!table) return systemLookup;
	return (hostname, cb) => {
		const known = table[hostname.toLowerCase()];
		if (known) cb(null, known);
		else systemLookup(hostname, cb);
	};
}

/** How a host is allowed: by its exact name, by a ".domain" entry, or not at all. */
export function hostAllowance(hostname: string, allowed: readonly string[]): 'explicit' | 'domain' | null {
	const h = hostname.toLowerCase().replace(/^\[|\]$/g, '').replace(/\.$/, '');
	let how: 'explicit' | 'domain' | null = null;
	for (const raw of allowed) {
		const entry = raw.toLowerCase().trim();
		if (!entry) continue;
		if (entry === h) return 'explicit';
		if (entry.startsWith('.') && h.endsWith(entry) && h.length > entry.length) how = 'domain';
	}
	return how;
}

function ipv4Private(ip: string): boolean {
	const [a, b] = ip.split('.').map(Number);
	return (
		a === 0 ||
		a === 10 ||
		a === 127 ||
		(a === 100 && b >= 64 && b <= 127) ||
		(a === 169 && b === 254) ||
		(a === 172 && b >= 16 && b <= 31) ||
		(a === 192 && b === 168) ||
		(a === 198 && (b === 18 || b === 19)) ||
		a >= 224
	);
}

/**
 * Loopback, private (RFC 1918, RFC 4193), shared (RFC 6598), link-local (RFC 3927, RFC 4291),
 * unspecified, benchmarking and multicast/reserved addresses; IPv4-mapped IPv6 by its IPv4 part.
 */
export function isPrivateAddress(address: string): boolean {
	const ip = address.replace(/^\[|\]$/g, '').split('%')[0].toLowerCase();
	const kind = net.isIP(ip);
	if (kind === 4) return ipv4Private(ip);
	if (kind !== 6) return true;
	const mapped = /^::ffff:(\d+\.\d+\.\d+\.\d+)$/.exec(ip);
	if (mapped) return ipv4Private(mapped[1]);
	if (ip === '::' || ip === '::1') return true;
	const first = parseInt(ip.split(':')[0] || '0', 16);
	return (first & 0xfe00) === 0xfc00 || (first & 0xffc0) === 0xfe80 || (first & 0xff00) === 0xff00;
}

function checkUrl(raw: string, allowed: readonly string[]): { url: URL; allowance: 'explicit' | 'domain' } {
	let url: URL;
	try {
		url = new URL(raw);
	} catch {
		throw new SkymapFetchError('bad_url', `sky-map URL "${raw.slice(0, 80)}" is not a URL`);
	}
	if (url.protocol !== 'http:' && url.protocol !== 'https:') throw new SkymapFetchError('scheme', `sky-map URL scheme ${url.protocol} refused (http or https only)`);
	if (url.username || url.password) throw new SkymapFetchError('bad_url', 'sky-map URL with credentials refused');
	const allowance = hostAllowance(url.hostname, allowed);
	if (!allowance) throw new SkymapFetchError('host_not_allowed', `sky-map host ${url.hostname} is not on the allow-list (SKYMAP_HOSTS)`);
	const literal = url.hostname.replace(/^\[|\]$/g, '');
	if (allowance === 'domain' && net.isIP(literal) && isPrivateAddress(literal)) {
		throw new SkymapFetchError('private_address', `sky-map host ${url.hostname} is a private address`);
	}
	return { url, allowance };
}

/** Download a sky map under `limits`. Throws {@link SkymapFetchError}. */
export async function downloadSkymap(rawUrl: string, limits: DownloadLimits): Promise<DownloadedSkymap> {
	const { allowedHosts: allowed, maxBytes, timeoutMs, maxRedirects } = limits;
	const resolveName = resolverOf(limits.resolveAs);
	const deadline = Date.now() + timeoutMs;

	const first = checkUrl(rawUrl, allowed);
	let current = first;
	for (let hop = 0; ; hop++) {
		const result = await requestOnce(current.url, current.allowance, { maxBytes, deadline, timeoutMs, resolveName });
		if (result.kind === 'body') return { bytes: result.bytes, finalUrl: current.url.href, contentType: result.contentType };
		if (hop >= maxRedirects) throw new SkymapFetchError('redirect', `more than ${maxRedirects} redirects`);
		let next: URL;
		try {
			next = new URL(result.location, current.url);
		} catch {
			throw new SkymapFetchError('redirect', 'redirect to an unreadable location');
		}
		if (next.host.toLowerCase() !== first.url.host.toLowerCase()) {
			throw new SkymapFetchError('redirect', `redirect to another host (${next.host}) refused`);
		}
		current = checkUrl(next.href, allowed);
	}
}

type OnceResult = { kind: 'body'; bytes: Buffer; contentType: string | null } | { kind: 'redirect'; location: string };

function requestOnce(
	url: URL,
	allowance: 'explicit' | 'domain',
	o: { maxBytes: number; deadline: number; timeoutMs: number; resolveName: LookupFn }
): Promise<OnceResult> {
	return new Promise((resolve, reject) => {
		let settled = false;
		let timer: NodeJS.Timeout | undefined;
		const finish = (err: Error | null, value?: OnceResult) => {
			if (settled) return;
			settled = true;
			clearTimeout(timer);
			if (err) reject(err);
			else resolve(value!);
		};
		const lookup: net.LookupFunction = (hostname, options, cb) => {
			o.resolveName(hostname, (err, addrs) => {
				if (err || addrs.length === 0) return cb(err ?? new Error(`no address for ${hostname}`), '', 4);
				if (allowance === 'domain') {
					const bad = addrs.find((a) => isPrivateAddress(a.address));
					if (bad) {
						const e = new SkymapFetchError('private_address', `sky-map host ${hostname} resolves to a private address (${bad.address})`);
						finish(e);
						return cb(e, '', 4);
					}
				}
				const wanted = options.family === 4 || options.family === 6 ? addrs.filter((a) => a.family === options.family) : addrs;
				const pick = wanted[0] ?? addrs[0];
				if (options.all) (cb as unknown as (e: null, a: { address: string; family: number }[]) => void)(null, [pick]);
				else cb(null, pick.address, pick.family);
			});
		};
		const client = url.protocol === 'https:' ? https : http;
		// A connection of its own (agent: false): maps come minutes apart, and a kept-alive socket to a
		// sky-map server that has since restarted would fail the next download with "socket hang up".
		const req = client.request(url, { method: 'GET', agent: false, lookup, headers: { accept: 'application/fits, application/gzip, */*', 'accept-encoding': 'identity' } });
		const remaining = Math.max(1, o.deadline - Date.now());
		if (!settled)
			timer = setTimeout(() => {
				const e = new SkymapFetchError('timeout', `sky-map download took longer than ${o.timeoutMs} ms`);
				finish(e);
				req.destroy(e);
			}, remaining);
		req.on('error', (e) => finish(e instanceof SkymapFetchError ? e : new SkymapFetchError('network', `sky-map download failed: ${e.message}`)));
		req.on('response', (res) => {
			const status = res.statusCode ?? 0;
			if (status >= 300 && status < 400 && res.headers.location) {
				res.resume();
				return finish(null, { kind: 'redirect', location: res.headers.location });
			}
			if (status !== 200) {
				res.resume();
				return finish(new SkymapFetchError('http_status', `sky-map server answered ${status}`));
			}
			const declared = Number(res.headers['content-length']);
			if (Number.isFinite(declared) && declared > o.maxBytes) {
				const e = new SkymapFetchError('too_large', `sky map is ${declared} bytes, over the ${o.maxBytes}-byte limit`);
				finish(e);
				return req.destroy(e);
			}
			const body = new ByteCollector(Number.isFinite(declared) ? declared : undefined);
			res.on('data', (chunk: Buffer) => {
				if (body.length + chunk.length > o.maxBytes) {
					const e = new SkymapFetchError('too_large', `sky map exceeds the ${o.maxBytes}-byte limit`);
					finish(e);
					req.destroy(e);
					return;
				}
				body.push(chunk);
			});
			res.on('end', () => {
				body.finish().then(
					(bytes) => finish(null, { kind: 'body', bytes, contentType: res.headers['content-type'] ?? null }),
					(e: Error) => finish(new SkymapFetchError('network', `sky-map download failed: ${e.message}`))
				);
			});
			res.on('error', (e) => finish(new SkymapFetchError('network', `sky-map download failed: ${e.message}`)));
		});
		req.end();
	});
}
