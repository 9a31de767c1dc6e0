/**
 * Where the server may send a request on someone's say-so (chat webhooks): the address checks that
 * keep a typed URL from reaching the machine itself, the local network or a cloud metadata service.
 *
 * Every address a name resolves to is checked, IPv4 and IPv6, IPv4 inside IPv6 included; the
 * request then connects to the very address that was checked (`checkedLookup`), so a name that
 * answers differently the second time (DNS rebinding) gains nothing.
 */
import { isIP } from 'node:net';
import { lookup as dnsLookup } from 'node:dns/promises';
import type { LookupFunction } from 'node:net';
import { InputError } from './errors';

/** Special-purpose IPv4 blocks (IANA IPv4 Special-Purpose Address Registry, RFC 6890 and its updates). */
const IPV4_BLOCKED: readonly [string, number, string][] = [
	['0.0.0.0', 8, '“this network”'],
	['10.0.0.0', 8, 'a private network (RFC 1918)'],
	['100.64.0.0', 10, 'shared carrier address space (RFC 6598)'],
	['127.0.0.0', 8, 'this machine (loopback)'],
	['169.254.0.0', 16, 'link-local, where cloud metadata services live'],
	['172.16.0.0', 12, 'a private network (RFC 1918)'],
	['192.0.0.0', 24, 'IETF protocol assignments'],
	['192.0.2.0', 24, 'documentation addresses'],
	['192.168.0.0', 16, 'a private network (RFC 1918)'],
	['198.18.0.0', 15, 'benchmarking addresses'],
	['198.51.100.0', 24, 'documentation addresses'],
	['203.0.113.0', 24, 'documentation addresses'],
	['224.0.0.0', 4, 'multicast'],
	['240.0.0.0', 4, 'reserved addresses']
];

function ipv4ToInt(address: string): number {
	return address.split('.').reduce((n, part) => n * 256 + Number(part), 0);
}

function inIpv4Block(address: string, base: string, bits: number): boolean {
	const size = 2 ** (32 - bits);
	return Math.floor(ipv4ToInt(address) / size) === Math.floor(ipv4ToInt(base) / size);
}

/** The eight 16-bit groups of an IPv6 address (a trailing dotted IPv4 part folded in). */
export function ipv6Groups(address: string): number[] {
	let a = address.toLowerCase();
	const zone = a.indexOf('%');
	if (zone >= 0) a = a.slice(0, zone);
	const dotted = a.match(/(\d+\.\d+\.\d+\.\d+)$/);
	if (dotted) {
		const n = ipv4ToInt(dotted[1]);
		a = `${a.slice(0, -dotted[1].length)}${(n >>> 16).toString(16)}:${(n & 0xffff).toString(16)}`;
	}
	const [head, tail] = a.split('::');
	const h = head ? head.split(':') : [];
	const t = tail !== undefined && tail !== '' ? tail.split(':') : [];
	const missing = a.includes('::') ? 8 - h.length - t.length : 0;
	return [...h, ...Array<string>(missing).fill('0'), ...t].map((g) => parseInt(g, 16));
}

function groupsToIpv4(g: number[]): string {
	return [g[6] >> 8, g[6] & 0xff, g[7] >> 8, g[7] & 0xff].join('.');
}

/**
 * Why `address` (an IP literal) must not be reached from here, in words; null when it is a public
 * unicast address. IPv6 forms that carry an IPv4 address (mapped ::ffff:a.b.c.d, compatible ::a.b.c.d,
 * NAT64 64:ff9b::/96, 6to4 2002::/16) are judged by that IPv4 address.
 */
export function blockedReason(address: string): string | null {
	const version = isIP(address.split('%')[0]);
	if (version === 4) {
		for (const [base, bits, why] of IPV4_BLOCKED) if (inIpv4Block(address, base, bits)) return why;
		return null;
	}
	if (version !== 6) return 'not an IP address';
	const g = ipv6Groups(address);
	const zeros = (n: number) => g.slice(0, n).every((x) => x === 0);
	if (g.every((x) => x === 0)) return 'the unspecified address';
	if (zeros(7) && g[7] === 1) return 'this machine (loopback)';
	if (zeros(5) && g[5] === 0xffff) return blockedReason(groupsToIpv4(g)); // IPv4-mapped, RFC 4291 §2.5.5.2
	if (zeros(6)) return blockedReason(groupsToIpv4(g)); // IPv4-compatible (deprecated), RFC 4291 §2.5.5.1
	if (g[0] === 0x64 && g[1] === 0xff9b && g.slice(2, 6).every((x) => x === 0)) return blockedReason(groupsToIpv4(g)); // NAT64, RFC 6052
	if (g[0] === 0x2002) return blockedReason([g[1] >> 8, g[1] & 0xff, g[2] >> 8, g[2] & 0xff].join('.')); // 6to4, RFC 3056
	if ((g[0] & 0xfe00) === 0xfc00) return 'a private network (unique local, RFC 4193)';
	if ((g[0] & 0xffc0) === 0xfe80) return 'link-local';
	if ((g[0] & 0xffc0) === 0xfec0) return 'site-local (deprecated)';
	if ((g[0] & 0xff00) === 0xff00) return 'multicast';
	if (g[0] === 0x2001 && g[1] === 0x0db8) return 'documentation addresses';
	if (g[0] === 0x0100 && zeros(4)) return 'a discard prefix';
	if (zeros(1) && g[0] === 0) return 'reserved addresses';
	return null;
}

/** The local fake receiver, the one loopback address allowed (dev and tests). */
export interface LoopbackException {
	port: number;
}

export class OutboundUrlError extends InputError {}

type Resolve = (hostname: string) => Promise<{ address: string; family: number }[]>;

const systemResolve: Resolve = (hostname) => dnsLookup(hostname, { all: true, verbatim: true });

/**
 * Check a webhook address: https (or http to the local fake receiver), no user name or password in
 * it, and a host whose every address is public. Returns the parsed URL; throws OutboundUrlError with
 * a sentence for the form's `field`.
 */
export async function checkOutboundUrl(
	raw: string,
	o: { field?: string; fake?: LoopbackException | null; resolve?: Resolve } = {}
): Promise<URL> {
	const field = o.field ?? 'url';
	let url: URL;
	try {
		url = new URL(raw.trim());
	} catch {
		throw new OutboundUrlError('This is not a web address. Paste the whole address the chat product gave you, starting with https://.', field);
	}
	if (url.username || url.password) throw new OutboundUrlError('The address must not hold a user name or password.', field);
	const host = url.hostname.replace(/^\[|\]$/g, '');
	const port = Number(url.port || (url.protocol === 'https:' ? 443 : 80));
	const isFake = Boolean(o.fake) && url.protocol === 'http:' && (host === '127.0.0.1' || host === 'localhost') && port === o.fake!.port;
	if (isFake) return url;
	if (url.protocol !== 'https:') throw new OutboundUrlError('Use an https:// address: messages are not sent unencrypted.', field);
	if (isIP(host)) {
		const why = blockedReason(host);
		if (why) throw new OutboundUrlError(`That address points to ${why}, which messages may not be sent to. Use the chat product’s public address.`, field);
		return url;
	}
	if (host === 'localhost' || host.endsWith('.localhost')) throw new OutboundUrlError('That address points to this machine (loopback), which messages may not be sent to.', field);
	let addresses: { address: string }[];
	try {
		addresses = await (o.resolve ?? systemResolve)(host);
	} catch {
		throw new OutboundUrlError(`We could not find the host “${host}”. Check the address for typing mistakes.`, field);
	}
	if (addresses.length === 0) throw new OutboundUrlError(`We could not find the host “${host}”. Check the address for typing mistakes.`, field);
	for (const { address } of addresses) {
		const why = blockedReason(address);
		if (why) throw new OutboundUrlError(`“${host}” leads to ${address}, ${why}, which messages may not be sent to.`, field);
	}
	return url;
}

/**
 * A `lookup` for http(s).request that resolves the name, refuses it unless every address is public,
 * and connects to the first of the addresses it checked.
 */
export function checkedLookup(resolve: Resolve = systemResolve): LookupFunction {
	return (hostname, options, callback) => {
		resolve(hostname)
			.then((addresses) => {
				const bad = addresses.find((a) => blockedReason(a.address));
				if (!addresses.length || bad) {
					const err = Object.assign(new Error(bad ? `${hostname} leads to a blocked address (${bad.address})` : `${hostname} has no address`), { code: 'EBLOCKED' });
					throw err;
				}
				if ((options as { all?: boolean }).all) (callback as (e: null, a: { address: string; family: number }[]) => void)(null, addresses);
				else callback(null, addresses[0].address, addresses[0].family);
			})
			.catch((e: NodeJS.ErrnoException) => callback(e, '', 0));
	};
}
