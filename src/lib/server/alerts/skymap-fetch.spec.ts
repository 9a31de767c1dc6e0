import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { fetchSkymap, hostAllowance, isPrivateAddress, SkymapFetchError } from './skymap-fetch';
import { refusalOf } from '../platform/testing/refusal';
import { stopWorkPool, workDone } from '../platform/work-pool';
import { apiErrorFrom } from '../platform/api';

let server: http.Server;
let port = 0;
const body = Buffer.alloc(5000, 7);

beforeAll(async () => {
	server = http.createServer((req, res) => {
		const path = req.url ?? '/';
		if (path === '/map.fits') {
			res.writeHead(200, { 'content-type': 'application/fits', 'content-length': body.length });
			return res.end(body);
		}
		if (path === '/same-host') {
			res.writeHead(302, { location: '/map.fits' });
			return res.end();
		}
		if (path === '/other-host') {
			res.writeHead(302, { location: `http://localhost:${port}/map.fits` });
			return res.end();
		}
		if (path === '/loop') {
			res.writeHead(302, { location: '/loop' });
			return res.end();
		}
		if (path === '/chunked-big') {
			// No content-length: the cap has to be enforced while streaming.
			res.writeHead(200, { 'content-type': 'application/fits' });
			for (let i = 0; i < 20; i++) res.write(Buffer.alloc(1000));
			return res.end();
		}
		if (path === '/slow') {
			res.writeHead(200);
			res.write('x');
			return; // never ends
		}
		res.writeHead(404);
		res.end();
	});
	await new Promise<void>((r) => server.listen(0, '127.0.0.1', () => r()));
	port = (server.address() as AddressInfo).port;
});
afterAll(async () => {
	await stopWorkPool();
	server.closeAllConnections();
	await new Promise<void>((r) => server.close(() => r()));
});

const base = () => `http://127.0.0.1:${port}`;
const allowed = ['127.0.0.1', 'localhost'];

const refusal = (p: Promise<unknown>) => refusalOf(p, SkymapFetchError);

describe('fetchSkymap', () => {
	it('downloads from an allow-listed host, following a redirect on the same host', async () => {
		expect.hasAssertions();
		const before = workDone('downloadSkymap');
		const a = await fetchSkymap(`${base()}/map.fits`, { allowedHosts: allowed });
		// Downloaded on a thread of the I/O pool, not this one.
		expect(workDone('downloadSkymap')).toBe(before + 1);
		expect(a.bytes.equals(body)).toBe(true);
		const b = await fetchSkymap(`${base()}/same-host`, { allowedHosts: allowed });
		expect(b.finalUrl).toBe(`${base()}/map.fits`);
		expect(b.bytes.length).toBe(5000);
	});

	it('refuses a host that is not on the allow-list, and schemes other than http(s)', async () => {
		expect.hasAssertions();
		const notAllowed = await refusal(fetchSkymap(`${base()}/map.fits`, { allowedHosts: ['maps.example.org'] }));
		expect(notAllowed.code).toBe('host_not_allowed');
		// Rebuilt from the I/O thread, it still answers as a refusal made here: 502 with its code and sentence.
		const answer = apiErrorFrom(notAllowed);
		expect(answer.status).toBe(502);
		expect(await answer.json()).toEqual({ error: { code: 'host_not_allowed', message: 'sky-map host 127.0.0.1 is not on the allow-list (SKYMAP_HOSTS)' } });
		expect((await refusal(fetchSkymap('file:///etc/passwd', { allowedHosts: allowed }))).code).toBe('scheme');
		expect((await refusal(fetchSkymap('ftp://127.0.0.1/x', { allowedHosts: allowed }))).code).toBe('scheme');
		expect((await refusal(fetchSkymap(`http://user:pw@127.0.0.1:${port}/map.fits`, { allowedHosts: allowed }))).code).toBe('bad_url');
	});

	it('refuses a redirect to another host, even one that is allow-listed, and redirect loops', async () => {
		expect.hasAssertions();
		const e = await refusal(fetchSkymap(`${base()}/other-host`, { allowedHosts: allowed }));
		expect(e.code).toBe('redirect');
		expect(e.message).toBe(`redirect to another host (localhost:${port}) refused`);
		expect((await refusal(fetchSkymap(`${base()}/loop`, { allowedHosts: allowed }))).message).toBe('more than 3 redirects');
	});

	it('refuses a file over the size cap, by its declared length or while streaming', async () => {
		expect.hasAssertions();
		const declared = await refusal(fetchSkymap(`${base()}/map.fits`, { allowedHosts: allowed, maxBytes: 4999 }));
		expect(declared.message).toBe('sky map is 5000 bytes, over the 4999-byte limit');
		const streamed = await refusal(fetchSkymap(`${base()}/chunked-big`, { allowedHosts: allowed, maxBytes: 10_000 }));
		expect(streamed.code).toBe('too_large');
		expect((await fetchSkymap(`${base()}/chunked-big`, { allowedHosts: allowed, maxBytes: 20_000 })).bytes.length).toBe(20_000);
	});

	it('gives up after the deadline on a server that never finishes', async () => {
		expect.hasAssertions();
		const t0 = Date.now();
		const e = await refusal(fetchSkymap(`${base()}/slow`, { allowedHosts: allowed, timeoutMs: 300 }));
		expect(e.code).toBe('timeout');
		expect(Date.now() - t0).toBeGreaterThanOrEqual(290);
		expect(Date.now() - t0).toBeLessThan(2000);
	});

	it('refuses a domain-allowed host that resolves to a private address; an explicit entry may', async () => {
		expect.hasAssertions();
		const toLoopback = { 'maps.example.org': [{ address: '127.0.0.1', family: 4 }] };
		const e = await refusal(fetchSkymap(`http://maps.example.org:${port}/map.fits`, { allowedHosts: ['.example.org'], resolveAs: toLoopback }));
		expect(e.code).toBe('private_address');
		expect(e.message).toMatch(/resolves to a private address \(127\.0\.0\.1\)/);
		// Named exactly, the operator has vouched for it (our own broker on loopback).
		const ok = await fetchSkymap(`http://maps.example.org:${port}/map.fits`, { allowedHosts: ['maps.example.org'], resolveAs: toLoopback });
		expect(ok.bytes.length).toBe(5000);
		expect((await refusal(fetchSkymap(`${base()}/nope`, { allowedHosts: allowed }))).message).toBe('sky-map server answered 404');
	});
});

describe('address and host rules', () => {
	it('classifies private, loopback and link-local addresses (RFC 1918, 6598, 3927, 4193, 4291)', () => {
		expect.hasAssertions();
		for (const ip of ['10.1.2.3', '127.0.0.1', '172.16.0.1', '172.31.255.255', '192.168.1.1', '169.254.169.254', '100.64.0.1', '0.0.0.0', '::1', '::', 'fe80::1', 'fd00::1', '::ffff:10.0.0.1', 'not-an-ip'])
			expect(isPrivateAddress(ip), ip).toBe(true);
		for (const ip of ['8.8.8.8', '172.32.0.1', '192.169.0.1', '2001:db8::1', '::ffff:8.8.4.4']) expect(isPrivateAddress(ip), ip).toBe(false);
	});

	it('matches exact names and ".domain" entries only', () => {
		expect.hasAssertions();
		expect(hostAllowance('MAPS.example.org', ['maps.example.org'])).toBe('explicit');
		expect(hostAllowance('a.maps.example.org', ['.example.org'])).toBe('domain');
		expect(hostAllowance('example.org', ['.example.org'])).toBeNull();
		expect(hostAllowance('evil-example.org', ['.example.org'])).toBeNull();
		expect(hostAllowance('maps.example.org.evil.net', ['maps.example.org'])).toBeNull();
	});
});
