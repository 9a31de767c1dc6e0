import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { startBroker, type FakeBroker } from '../../../../fake-alert-broker/broker.ts';
import { createTestDatabase } from '../platform/testing/database';
import * as table from '../platform/db/schema';
import { onRecorded, type LiveMessage } from '../platform/realtime';
import { useStorageRoot } from '../platform/storage';
import { commitNotice } from './ingest';
import { AlertsService, archiveBaseUrl } from './service';
import type { DB } from '../platform/db';

const dir = fileURLToPath(new URL('../../../../tests/fixtures/notices/', import.meta.url));
const MAP_NAME = 'SX30041207-1.multiorder.fits.gz';
const mapBytes = readFileSync(dir + 'skymap-demo.multiorder.fits.gz');

async function waitFor(check: () => boolean, ms: number, what: string): Promise<void> {
	const t0 = Date.now();
	while (!check()) {
		if (Date.now() - t0 > ms) throw new Error(`timed out after ${ms} ms waiting for ${what}`);
		await new Promise((r) => setTimeout(r, 20));
	}
}

let database: DB;
let storage: string;
let log: LiveMessage[];
let unlisten: () => void;
const cleanups: (() => Promise<void>)[] = [];

beforeEach(() => {
	database = createTestDatabase();
	storage = mkdtempSync(join(tmpdir(), 'strainline-service-'));
	useStorageRoot(storage);
	log = [];
	unlisten = onRecorded((m) => log.push(m));
});
afterEach(async () => {
	for (const c of cleanups.splice(0).reverse()) await c();
	unlisten();
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
});

/** Notice n: its own event and IVORN, the sky map served by `broker`. */
function noticeXml(b: FakeBroker, n: number): string {
	return readFileSync(dir + 'bns-preliminary.xml', 'utf8')
		.replaceAll('http://127.0.0.1:8098', b.httpBase)
		.replace('#SX30041207-1-preliminary', `#SXL${n}-1-preliminary`)
		.replace('value="SX30041207"', `value="SXL${n}"`);
}

async function broker(opts: Parameters<typeof startBroker>[0] = {}): Promise<FakeBroker> {
	const b = await startBroker({ ackTimeoutMs: 1500, iamaliveIntervalMs: 60_000, files: new Map([[MAP_NAME, mapBytes]]), ...opts });
	cleanups.push(() => b.stop());
	return b;
}

function service(b: FakeBroker): AlertsService {
	const s = new AlertsService({
		broker: `127.0.0.1:${b.vtpPort}`,
		archiveUrl: b.httpBase,
		retryIntervalMs: 60_000,
		fetch: { allowedHosts: ['127.0.0.1'], timeoutMs: 3000 },
		listener: { backoff: { initialMs: 50, maxMs: 300, jitter: 0.5 }, silenceTimeoutMs: 5000, connectTimeoutMs: 1000 },
		log: () => undefined
	});
	cleanups.push(() => s.stop());
	return s;
}

const processedIvorns = () =>
	log.filter((m): m is LiveMessage<'notice.processed'> => m.type === 'notice.processed' && m.room === 'board').map((m) => String(m.payload.ivorn));

describe('archive URL', () => {
	it('is taken as given, derived as VTP port − 1 for "auto", or off', () => {
		expect.hasAssertions();
		expect(archiveBaseUrl('http://b.example:9000', { host: 'x', port: 1 })).toBe('http://b.example:9000');
		expect(archiveBaseUrl('auto', { host: '127.0.0.1', port: 8099 })).toBe('http://127.0.0.1:8098');
		expect(archiveBaseUrl('auto', { host: '::1', port: 8099 })).toBe('http://[::1]:8098');
		expect(archiveBaseUrl(null, { host: '127.0.0.1', port: 8099 })).toBeNull();
	});
});

describe('alert service against the fake broker (loopback)', () => {
	it('every notice appears exactly once across a service restart mid-stream and a broker restart', async () => {
		expect.hasAssertions();
		const b1 = await broker();
		const published: string[] = [];
		const pub = async (b: FakeBroker, n: number) => {
			const xml = noticeXml(b, n);
			published.push(`ivo://strainline.example/fake-broker#SXL${n}-1-preliminary`);
			return b.publish(xml);
		};

		const a = service(b1);
		await a.start();
		await waitFor(() => b1.subscriberCount() === 1 && a.listener!.status().state === 'connected', 3000, 'first connection');
		expect(await pub(b1, 1)).toMatchObject({ acked: 1 });
		expect(await pub(b1, 2)).toMatchObject({ acked: 1 });
		await a.stop();

		// While the app is down: two notices nobody hears, and one the old process had acked and
		// stored but not processed before it died.
		expect(await pub(b1, 3)).toMatchObject({ delivered: 0 });
		expect(await pub(b1, 4)).toMatchObject({ delivered: 0 });
		await pub(b1, 5);
		commitNotice(noticeXml(b1, 5), 'vtp');

		const s = service(b1);
		await s.start();
		await waitFor(() => processedIvorns().length === 5, 8000, 'back-fill and retry');
		expect(s.lastBackfill?.error).toBeNull();

		// The broker restarts on the same ports, keeping its archive.
		const { vtpPort, httpPort } = b1;
		const archive = b1.archive();
		await b1.stop();
		await waitFor(() => s.listener!.status().state !== 'connected', 3000, 'drop');
		const b2 = await broker({ vtpPort, httpPort, archive });
		await waitFor(() => b2.subscriberCount() === 1 && s.listener!.status().state === 'connected', 5000, 'reconnect');
		expect(await pub(b2, 6)).toMatchObject({ acked: 1 });
		expect(await pub(b2, 7)).toMatchObject({ acked: 1 });
		await waitFor(() => processedIvorns().length >= 7, 8000, 'all processed');
		// Let the reconnect's back-fill finish: it re-offers everything, and must change nothing.
		await waitFor(() => s.lastBackfill !== null && s.lastBackfill.at > new Date(Date.now() - 5000).toISOString(), 3000, 'back-fill');
		await s.stop();

		expect(processedIvorns().sort()).toEqual([...published].sort());
		expect(new Set(published).size).toBe(7);
		const notices = database.select({ ivorn: table.notice.ivorn }).from(table.notice).all();
		expect(notices.map((n) => n.ivorn).sort()).toEqual([...published].sort());
		const inbox = database.select().from(table.noticeInbox).all();
		expect(inbox).toHaveLength(7);
		expect(inbox.every((r) => r.processedAt !== null && r.error === null)).toBe(true);
		expect(inbox.filter((r) => r.via === 'backfill').map((r) => r.ivorn.split('#')[1]).sort()).toEqual(['SXL3-1-preliminary', 'SXL4-1-preliminary']);
		expect(database.select().from(table.skymap).all()).toHaveLength(7);
		expect(database.select().from(table.gwEvent).all()).toHaveLength(7);
		expect(s.listener!.status().reconnects).toBeGreaterThanOrEqual(1);
	});

	it('acks a malformed notice once stored, and keeps it in the inbox with its error', async () => {
		expect.hasAssertions();
		const b = await broker();
		const s = service(b);
		await s.start();
		await waitFor(() => b.subscriberCount() === 1, 3000, 'connection');
		const bad = readFileSync(dir + 'malformed/missing-event-id.xml', 'utf8');
		expect(await b.publish(bad)).toMatchObject({ acked: 1 });
		await waitFor(() => log.some((m) => m.type === 'notice.rejected'), 3000, 'rejection');
		const row = database.select().from(table.noticeInbox).get()!;
		expect(row.error).toMatch(/missing required Param SourceEventId/);
		expect(row.rawXml).toBe(bad);
	});

	it('reads JSON notices from the archive on a timer (VTP carries XML only): every scenario notice once, maps from inside the notices', async () => {
		expect.hasAssertions();
		const b = await broker();
		const s = new AlertsService({
			broker: `127.0.0.1:${b.vtpPort}`,
			archiveUrl: b.httpBase,
			archivePollMs: 100,
			retryIntervalMs: 60_000,
			// No host may be fetched from: every map must come from inside its notice.
			fetch: { allowedHosts: [], timeoutMs: 1000 },
			listener: { backoff: { initialMs: 50, maxMs: 300, jitter: 0.5 }, silenceTimeoutMs: 5000, connectTimeoutMs: 1000 },
			log: () => undefined
		});
		cleanups.push(() => s.stop());
		await s.start();
		await waitFor(() => b.subscriberCount() === 1, 3000, 'connection');
		const results = await b.play('bns', { speed: 1000, format: 'json' });
		expect(results.map((r) => r.delivered)).toEqual([0, 0, 0]);
		await waitFor(() => processedIvorns().length === 3, 8000, 'the archive poll');
		// Several more polls re-offer the same notices: nothing changes.
		const polls = s.lastBackfill!.at;
		await waitFor(() => s.lastBackfill!.at > polls, 3000, 'another poll');
		await s.stop();
		const inbox = database.select().from(table.noticeInbox).all();
		expect(inbox).toHaveLength(3);
		expect(inbox.every((r) => r.format === 'json' && r.via === 'backfill' && r.error === null)).toBe(true);
		expect(inbox.map((r) => r.ivorn.split('#')[1].split('-')[0])).toEqual(['preliminary', 'initial', 'update']);
		const maps = database.select().from(table.skymap).all();
		expect(maps.length).toBeGreaterThanOrEqual(1);
		expect(maps.every((m) => m.error === null && m.sourceUrl === null && m.summary !== null)).toBe(true);
		expect(database.select().from(table.gwEvent).get()).toMatchObject({ sourceEventId: 'SX30041207', latestKind: 'update' });
	});
});
