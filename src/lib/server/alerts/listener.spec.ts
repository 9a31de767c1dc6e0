import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { gunzipSync } from 'node:zlib';
import { afterEach, describe, expect, it } from 'vitest';
import { startBroker, type FakeBroker } from '../../../../fake-alert-broker/broker.ts';
import { parseVoevent, sniffIvorn } from '../../alerts/voevent.ts';
import {
	backfillFromArchive,
	backoffDelayMs,
	DEFAULT_VTP_PORT,
	parseBrokerAddress,
	VtpListener,
	type ListenerOptions
} from './listener.ts';

const dir = fileURLToPath(new URL('../../../../tests/fixtures/notices/', import.meta.url));
const fixture = (name: string) => readFileSync(dir + name, 'utf8');
const IDENTITY = 'ivo://strainline.example/test-listener';

/** Poll until `check` is true; fail after `ms`. */
async function waitFor(check: () => boolean, ms = 3000, what = 'condition'): Promise<void> {
	const t0 = Date.now();
	while (!check()) {
		if (Date.now() - t0 > ms) throw new Error(`timed out after ${ms} ms waiting for ${what}`);
		await new Promise((r) => setTimeout(r, 10));
	}
}

/** A notice with a fresh ivorn, built from a fixture. */
function noticeWithIvorn(n: number): string {
	return fixture('bns-preliminary.xml').replace('#SX30041207-1-preliminary', `#SX30041207-${n}-preliminary`);
}

/** The app's inbox in miniature: unique by IVORN, records every offer. */
function makeStore() {
	const byIvorn = new Map<string, string>();
	const offers: string[] = [];
	return {
		byIvorn,
		offers,
		commit: async (xml: string) => {
			const ivorn = sniffIvorn(xml) ?? `(none:${xml.length})`;
			offers.push(ivorn);
			if (!byIvorn.has(ivorn)) byIvorn.set(ivorn, xml);
		}
	};
}

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
	for (const c of cleanups.splice(0).reverse()) await c();
});

async function broker(opts: Parameters<typeof startBroker>[0] = {}): Promise<FakeBroker> {
	const b = await startBroker({ ackTimeoutMs: 1500, iamaliveIntervalMs: 60_000, ...opts });
	cleanups.push(() => b.stop());
	return b;
}

function listener(b: FakeBroker, opts: Partial<ListenerOptions> & Pick<ListenerOptions, 'commit'>): VtpListener {
	const l = new VtpListener({
		host: '127.0.0.1',
		port: b.vtpPort,
		identity: IDENTITY,
		backoff: { initialMs: 50, maxMs: 300, jitter: 0.5 },
		silenceTimeoutMs: 5000,
		connectTimeoutMs: 1000,
		...opts
	});
	cleanups.push(() => l.stop());
	l.start();
	return l;
}

describe('parseBrokerAddress', () => {
	it('reads host:port, [v6]:port and a bare host', () => {
		expect(parseBrokerAddress('127.0.0.1:8099')).toEqual({ host: '127.0.0.1', port: 8099 });
		expect(parseBrokerAddress(' broker.example:5341 ')).toEqual({ host: 'broker.example', port: 5341 });
		expect(parseBrokerAddress('[::1]:9000')).toEqual({ host: '::1', port: 9000 });
		expect(parseBrokerAddress('broker.example')).toEqual({ host: 'broker.example', port: DEFAULT_VTP_PORT });
	});

	it('refuses what is not an address, with one-line reasons', () => {
		expect(() => parseBrokerAddress('')).toThrow(/empty/);
		expect(() => parseBrokerAddress('host:0')).toThrow(/outside 1–65535/);
		expect(() => parseBrokerAddress('host:70000')).toThrow(/outside 1–65535/);
		expect(() => parseBrokerAddress('host:http')).toThrow(/not a number/);
		expect(() => parseBrokerAddress('::1:9000')).toThrow(/brackets/);
		expect(() => parseBrokerAddress('tcp://host:1')).toThrow(/not host:port/);
	});
});

describe('backoffDelayMs', () => {
	it('grows exponentially up to the cap and removes at most the jitter fraction', () => {
		const o = { initialMs: 100, maxMs: 1000, factor: 2, jitter: 0.5 };
		expect([0, 1, 2, 3, 4, 10].map((a) => backoffDelayMs(a, o, () => 0))).toEqual([100, 200, 400, 800, 1000, 1000]);
		expect(backoffDelayMs(2, o, () => 0.999999)).toBe(200);
		for (let i = 0; i < 100; i++) {
			const d = backoffDelayMs(3, o);
			expect(d).toBeGreaterThanOrEqual(400);
			expect(d).toBeLessThanOrEqual(800);
		}
	});
});

describe('VtpListener against the fake broker (loopback)', () => {
	it('receives a notice, and acks only after commit resolves', async () => {
		const b = await broker();
		const timeline: string[] = [];
		let release!: () => void;
		const gate = new Promise<void>((r) => (release = r));
		b.on('ack', (a) => timeline.push(`ack ${a.ivorn}`));
		const l = listener(b, {
			commit: async (xml) => {
				timeline.push(`commit-start ${sniffIvorn(xml)}`);
				await gate;
				timeline.push('commit-end');
			}
		});
		await waitFor(() => b.subscriberCount() === 1 && l.status().state === 'connected', 3000, 'connection');
		const xml = fixture('bns-preliminary.xml');
		const ivorn = 'ivo://strainline.example/fake-broker#SX30041207-1-preliminary';
		const published = b.publish(xml);
		await waitFor(() => timeline.length === 1, 2000, 'commit start');
		// Hold the commit well past a round trip: no ack may arrive meanwhile.
		await new Promise((r) => setTimeout(r, 150));
		expect(timeline).toEqual([`commit-start ${ivorn}`]);
		release();
		const result = await published;
		expect(result).toEqual({ ivorn, delivered: 1, acked: 1, naked: 0, timedOut: 0 });
		expect(timeline).toEqual([`commit-start ${ivorn}`, 'commit-end', `ack ${ivorn}`]);
		expect(l.status()).toMatchObject({ received: 1, acked: 1, naked: 0 });
		expect(l.status().lastMessageAt).not.toBeNull();
	});

	it('naks when commit throws, and carries on with the next notice', async () => {
		const b = await broker();
		const reasons: (string | null)[] = [];
		b.on('nak', (n) => reasons.push(n.reason));
		let calls = 0;
		listener(b, {
			commit: async () => {
				if (calls++ === 0) throw new Error('inbox is read-only');
			}
		});
		await waitFor(() => b.subscriberCount() === 1);
		expect(await b.publish(noticeWithIvorn(11))).toMatchObject({ delivered: 1, acked: 0, naked: 1 });
		expect(reasons).toEqual(['inbox is read-only']);
		expect(await b.publish(noticeWithIvorn(12))).toMatchObject({ delivered: 1, acked: 1, naked: 0 });
	});

	it('answers iamalive with its own identity', async () => {
		const b = await broker();
		const replies: (string | null)[] = [];
		b.on('iamalive', (r) => replies.push(r.response));
		listener(b, { commit: async () => undefined });
		// The broker greets each subscriber with an iamalive at once; send a second one.
		await waitFor(() => replies.length >= 1, 2000, 'reply to greeting');
		b.sendIamalive();
		await waitFor(() => replies.length >= 2, 2000, 'second reply');
		expect(replies.every((r) => r === IDENTITY)).toBe(true);
	});

	it('hands a malformed notice to commit and acks it under its sniffed ivorn', async () => {
		const b = await broker();
		const store = makeStore();
		listener(b, { commit: store.commit });
		await waitFor(() => b.subscriberCount() === 1);
		const bad = fixture('malformed/unclosed-tag.xml');
		expect(await b.publish(bad)).toMatchObject({ acked: 1 });
		expect([...store.byIvorn.keys()]).toEqual(['ivo://strainline.example/fake-broker#SX30041600-1-preliminary']);
		expect(() => parseVoevent(store.byIvorn.values().next().value!)).toThrow(/malformed XML/);
	});

	it('reconnects after the broker restarts on the same port', async () => {
		const first = await startBroker({ ackTimeoutMs: 1500 });
		const port = first.vtpPort;
		const store = makeStore();
		const states: string[] = [];
		const l = listener(first, { commit: store.commit });
		l.on('status', (s) => states.push(s.state));
		await waitFor(() => first.subscriberCount() === 1);
		expect(await first.publish(noticeWithIvorn(21))).toMatchObject({ acked: 1 });
		await first.stop();
		await waitFor(() => l.status().state !== 'connected', 2000, 'drop');
		const second = await broker({ vtpPort: port, archive: first.archive() });
		await waitFor(() => second.subscriberCount() === 1 && l.status().state === 'connected', 4000, 'reconnect');
		expect(await second.publish(noticeWithIvorn(22))).toMatchObject({ acked: 1 });
		expect([...store.byIvorn.keys()].map((k) => k.split('#')[1])).toEqual(['SX30041207-21-preliminary', 'SX30041207-22-preliminary']);
		expect(l.status().reconnects).toBeGreaterThanOrEqual(1);
		expect(states).toContain('down');
		expect(states).toContain('connecting');
	});

	it('drops a silent broker and reconnects', async () => {
		// The broker greets, then says nothing (keep-alives every 60 s).
		const b = await broker();
		const l = listener(b, { commit: async () => undefined, silenceTimeoutMs: 250 });
		const t0 = Date.now();
		await waitFor(() => l.status().reconnects >= 2, 3000, 'two reconnects');
		const elapsed = Date.now() - t0;
		// Two silences of 250 ms plus short backoffs: well under 3 s, and not instantly.
		expect(elapsed).toBeGreaterThanOrEqual(450);
		expect(l.status().lastError).toBe('broker silent for 250 ms');
	});

	it('keeps connected while keep-alives arrive more often than the silence limit', async () => {
		const b = await broker({ iamaliveIntervalMs: 80 });
		const l = listener(b, { commit: async () => undefined, silenceTimeoutMs: 300 });
		await waitFor(() => l.status().state === 'connected');
		await new Promise((r) => setTimeout(r, 900));
		expect(l.status().reconnects).toBe(0);
		expect(l.status().state).toBe('connected');
	});

	it('after a listener restart mid-stream, archive back-fill leaves each notice committed exactly once', async () => {
		const b = await broker({ ackTimeoutMs: 400 });
		const store = makeStore();
		const published: string[] = [];
		const pub = async (n: number) => {
			const xml = noticeWithIvorn(n);
			published.push(sniffIvorn(xml)!);
			return b.publish(xml);
		};

		// The first listener's commit can be held at a gate, to stop it in the middle of one.
		let gate: Promise<void> = Promise.resolve();
		const l1 = listener(b, {
			commit: async (xml) => {
				await gate;
				await store.commit(xml);
			}
		});
		await waitFor(() => b.subscriberCount() === 1);
		for (const n of [31, 32, 33]) expect(await pub(n)).toMatchObject({ acked: 1 });
		const lastSeen = new Date();

		// Stop in the middle of a commit: that notice is stored but never acked.
		let hold!: () => void;
		gate = new Promise<void>((r) => (hold = r));
		const inFlight = pub(34);
		await new Promise((r) => setTimeout(r, 50));
		const stopping = l1.stop();
		hold();
		await stopping;
		expect(await inFlight).toMatchObject({ acked: 0, timedOut: 1 });

		// Published while nobody listens.
		for (const n of [35, 36]) expect(await pub(n)).toMatchObject({ delivered: 0 });

		const l2 = listener(b, { commit: store.commit });
		await waitFor(() => b.subscriberCount() === 1 && l2.status().state === 'connected');
		// Back-fill from a little before the last notice we know was acked: overlaps on purpose.
		const since = new Date(lastSeen.getTime() - 1000);
		const n = await backfillFromArchive({ baseUrl: b.httpBase, since, commit: store.commit, timeoutMs: 2000 });
		expect(n).toBeGreaterThanOrEqual(3);
		expect(await pub(37)).toMatchObject({ acked: 1 });

		expect(new Set(store.byIvorn.keys())).toEqual(new Set(published));
		expect(store.byIvorn.size).toBe(7);
		// The overlap really offered some notices twice; the store kept one of each.
		expect(store.offers.length).toBeGreaterThan(store.byIvorn.size);
	});

	it('plays the neutron-star scenario quickly; every notice parses and its sky map is served', async () => {
		const b = await broker();
		const store = makeStore();
		listener(b, { commit: store.commit });
		await waitFor(() => b.subscriberCount() === 1);
		const results = await b.play('bns', { speed: 1000, seed: 3 });
		expect(results.map((r) => r.acked)).toEqual([1, 1, 1]);
		const notices = [...store.byIvorn.values()].map((x) => parseVoevent(x));
		expect(notices.map((n) => n.kind)).toEqual(['preliminary', 'initial', 'update']);
		expect(notices[2].citations).toEqual([{ ivorn: notices[1].ivorn, cite: 'supersedes' }]);
		for (const n of notices) {
			expect(n.skymapUrl!.startsWith(b.httpBase + '/skymaps/')).toBe(true);
			const res = await fetch(n.skymapUrl!, { signal: AbortSignal.timeout(2000) });
			expect(res.status).toBe(200);
			const fits = gunzipSync(Buffer.from(await res.arrayBuffer()));
			expect(fits.subarray(0, 30).toString()).toBe('SIMPLE  =                    T');
		}
		const archive = await (await fetch(`${b.httpBase}/notices?since=2000-01-01T00:00:00Z`)).json();
		expect(archive.notices).toHaveLength(3);
		expect((await fetch(`${b.httpBase}/notices?since=yesterday`)).status).toBe(400);
		expect((await fetch(`${b.httpBase}/skymaps/nope.fits.gz`)).status).toBe(404);
	});

	it('back-fills both formats, each with its label; an entry with only `xml` (the older layout) is a VOEvent', async () => {
		expect.hasAssertions();
		const b = await broker();
		await b.publish('<VOEvent ivorn="ivo://x#1"/>');
		await b.publishJson('{"superevent_id": "SX1"}');
		const archive = (await (await fetch(`${b.httpBase}/notices`)).json()) as { notices: { format: string; text: string; xml?: string }[] };
		expect(archive.notices.map((n) => [n.format, n.text, n.xml])).toEqual([
			['voevent', '<VOEvent ivorn="ivo://x#1"/>', '<VOEvent ivorn="ivo://x#1"/>'],
			['json', '{"superevent_id": "SX1"}', undefined]
		]);
		const got: [string, string][] = [];
		const commit = async (text: string, format: string) => void got.push([format, text]);
		expect(await backfillFromArchive({ baseUrl: b.httpBase, since: new Date(0), commit })).toBe(2);
		expect(got).toEqual([
			['voevent', '<VOEvent ivorn="ivo://x#1"/>'],
			['json', '{"superevent_id": "SX1"}']
		]);
		const older = async () => new Response(JSON.stringify({ notices: [{ ivorn: null, publishedAt: '2030-01-01T00:00:00Z', xml: '<old/>' }] }));
		got.length = 0;
		expect(await backfillFromArchive({ baseUrl: 'http://archive.invalid', since: new Date(0), commit, fetch: older as unknown as typeof fetch })).toBe(1);
		expect(got).toEqual([['voevent', '<old/>']]);
	});

	it('drops a connection whose frame header claims more than the limit', async () => {
		const b = await broker();
		const l = listener(b, { commit: async () => undefined, maxFrameBytes: 1000 });
		await waitFor(() => l.status().state === 'connected');
		const r = await b.publish(noticeWithIvorn(41).padEnd(2000, ' '));
		expect(r).toMatchObject({ delivered: 1, acked: 0 });
		expect(l.status().lastError).toMatch(/exceeds the 1000-byte limit/);
		await waitFor(() => l.status().reconnects >= 1, 3000, 'reconnect');
	});
});
