import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { eq } from 'drizzle-orm';
import { afterAll, afterEach, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { startBroker, type FakeBroker } from '../../../../fake-alert-broker/broker.ts';
import { generateSkymap, skymapToFits } from '../../../../fake-alert-broker/skymap.ts';
import { createTestDatabase } from '../platform/testing/database';
import * as table from '../platform/db/schema';
import { onRecorded, type LiveMessage } from '../platform/realtime';
import { storedFileExists, useStorageRoot } from '../platform/storage';
import { updatePolicy, DEFAULT_TRIAGE_POLICY } from './triage-policy';
import { commitNotice, eventIdFor, processInbox, reprocessNotice, retryPending, retrySkymaps } from './ingest';
import { clearSkyMapCache, skyMapById } from './skymap-cache';
import { gzipSync } from 'node:zlib';
import { submitNotice } from './service';
import { saveVocabulary, vocabularyFor } from './streams';
import { vocabularySchema } from '../../alerts/voevent.ts';
import type { DB } from '../platform/db';
import { config, loadAlertsConfig } from '../platform/config';
import { gunzipSync } from 'node:zlib';

const dir = fileURLToPath(new URL('../../../../tests/fixtures/notices/', import.meta.url));
const raw = (name: string) => readFileSync(dir + name, 'utf8');
/** astropy 5.2.1 / healpy 1.16.1 figures for the fixture map (tests/fixtures/notices/skymap-demo.astropy.json). */
const astropy = JSON.parse(raw('skymap-demo.astropy.json')).maps[0] as { area50Deg2: number; area90Deg2: number; header: { DISTMEAN: number; DISTSTD: number } };

let broker: FakeBroker;
let storage: string;
let database: DB;
let log: LiveMessage[] = [];
let unlisten: () => void;
const fetchOpts = { allowedHosts: ['127.0.0.1'], timeoutMs: 3000 };

/** A fixture notice whose sky-map URL points at the broker started for these tests. */
function notice(name: string, replace: [string, string][] = []): string {
	let xml = raw(name).replaceAll('http://127.0.0.1:8098', broker.httpBase);
	for (const [a, b] of replace) xml = xml.replaceAll(a, b);
	return xml;
}

async function ingest(xml: string, via: 'vtp' | 'api' = 'vtp') {
	const c = commitNotice(xml, via);
	return processInbox(c.inboxId, { fetch: fetchOpts });
}

const FORMATS = ['voevent', 'json'] as const;
const json = (name: string) => raw(`json/${name}`);

/**
 * One invented story in either format (the JSON fixtures are written by
 * tests/fixtures/notices/json-fixtures.ts with the VOEvent fixtures' ids, times and figures).
 */
const stories = {
	voevent: {
		preliminary: () => notice('bns-preliminary.xml'),
		initial: () => notice('bns-initial.xml'),
		update: () => notice('bns-update.xml'),
		retraction: () => notice('retraction.xml'),
		/** The retraction fixture turned onto the neutron-star event, authored 08:10 UTC. */
		retractionOfBns: () =>
			notice('retraction.xml', [
				['SX30041315-2-retraction', 'SX30041207-9-retraction'],
				['SX30041315-1-preliminary', 'SX30041207-1-preliminary'],
				['SX30041315', 'SX30041207'],
				['2030-04-13T15:40:00', '2030-04-12T08:10:00']
			]),
		testRole: () => notice('test-role.xml'),
		retractionReason: 'Retracted: instrumental artefact.' as string | null
	},
	json: {
		preliminary: () => json('bns-preliminary.json'),
		initial: () => json('bns-initial.json'),
		update: () => json('bns-update.json'),
		retraction: () => json('retraction.json'),
		retractionOfBns: () => json('retraction.json').replace('SX30041315', 'SX30041207').replace('2030-04-13T15:40:00Z', '2030-04-12T08:10:00Z'),
		testRole: () => json('test-role.json'),
		retractionReason: null as string | null
	}
};

/** Process the fixture notice and crash right after the given durable step. */
async function crashAt(at: 'stored' | 'analysed', text = notice('bns-initial.xml')) {
	const c = commitNotice(text, 'vtp');
	await expect(
		processInbox(c.inboxId, {
			fetch: fetchOpts,
			onStage: (stage) => {
				if (stage === at) throw new Error('simulated crash');
			}
		})
	).rejects.toThrow('simulated crash');
}

const actions = (room?: string) => log.filter((m) => !room || m.room === room).map((m) => m.type);

beforeAll(async () => {
	broker = await startBroker({ ackTimeoutMs: 500 });
	const fixtureMap = readFileSync(dir + 'skymap-demo.multiorder.fits.gz');
	// A wider map for the preliminary notice, so that "which map does the event show" has an answer.
	const wide = skymapToFits(generateSkymap({ components: [{ raDeg: 197, decDeg: -23, widthDeg: 6 }], distance: { meanMpc: 150, stdMpc: 40 } }), {
		object: 'SX30041207',
		dateObs: '2030-04-12T07:30:41.250'
	});
	broker.addFile('SX30041207-1.multiorder.fits.gz', wide);
	broker.addFile('SX30041207-2.multiorder.fits.gz', fixtureMap);
	broker.addFile('SX30041207-3.multiorder.fits.gz', fixtureMap);
	broker.addFile('SXT0001-1.multiorder.fits.gz', fixtureMap);
	for (const name of ['SX30050101-1', 'SX30050101-2', 'SXT30050303-1', 'SXU30050404-1', 'A30050505-1']) broker.addFile(`${name}.multiorder.fits.gz`, fixtureMap);
});
afterAll(async () => {
	await broker.stop();
});
beforeEach(() => {
	database = createTestDatabase();
	storage = mkdtempSync(join(tmpdir(), 'strainline-ingest-'));
	useStorageRoot(storage);
	log = [];
	unlisten = onRecorded((m) => log.push(m));
});
afterEach(() => {
	unlisten();
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
});

describe('ingest: one notice end to end', () => {
	it('creates the event, stores notice and sky map, analyses it and tells the board in order', async () => {
		expect.hasAssertions();
		const r = await ingest(notice('bns-initial.xml'));
		expect(r).toMatchObject({ outcome: 'event-created', eventId: 'sx30041207', error: null });
		const event = database.select().from(table.gwEvent).get()!;
		expect(event).toMatchObject({ id: 'sx30041207', sourceEventId: 'SX30041207', state: 'active', role: 'observation', latestKind: 'initial', latestNoticeId: r.noticeId });
		// bns-initial.xml: FAR 0.0098 per year, given in yr-1 → Hz over a Julian year.
		expect(event.farHz! * 365.25 * 86400).toBeCloseTo(0.0098, 12);
		const map = database.select().from(table.skymap).get()!;
		expect(event.latestSkymapId).toBe(map.id);
		expect(map.error).toBeNull();
		// Against astropy/healpy on the same file (skymap-demo.astropy.json).
		expect(map.summary!.area90 / astropy.area90Deg2).toBeCloseTo(1, 6);
		expect(map.summary!.area50 / astropy.area50Deg2).toBeCloseTo(1, 6);
		expect(map.summary!.distanceMean! / astropy.header.DISTMEAN).toBeCloseTo(1, 2);
		expect(storedFileExists(map.filePath!)).toBe(true);
		expect(map.filePath).toBe(`skymaps/sx30041207/${r.noticeId}.fits.gz`);
		expect(map.bytes).toBe(readFileSync(dir + 'skymap-demo.multiorder.fits.gz').length);
		expect((map.display as { width: number }).width).toBe(360);
		expect(event.triage!.verdict).toBe('follow');

		expect(actions()).toEqual(['event.created', 'skymap.analysed', 'skymap.analysed', 'notice.processed', 'notice.processed']);
		expect(log.filter((m) => m.type === 'notice.processed').map((m) => m.room)).toEqual(['board', 'event:sx30041207']);
		expect(log.filter((m) => m.type === 'skymap.analysed').map((m) => m.room).sort()).toEqual(['board', 'event:sx30041207']);
		const processed = log.find((m) => m.type === 'notice.processed')!.payload;
		expect(processed).toEqual({
			eventId: 'sx30041207',
			noticeId: r.noticeId,
			ivorn: 'ivo://strainline.example/fake-broker#SX30041207-2-initial',
			kind: 'initial',
			role: 'observation',
			significant: true,
			triage: event.triage,
			latest: true
		});
		expect(log[0].payload).toEqual({ eventId: 'sx30041207', sourceEventId: 'SX30041207' });
		const analysed = log.find((m) => m.type === 'skymap.analysed')!.payload as { skymapId: string; summary: { area90: number } };
		expect(analysed.skymapId).toBe(map.id);
		expect(analysed.summary.area90).toBe(map.summary!.area90);
		const inbox = database.select().from(table.noticeInbox).get()!;
		expect(inbox.processedAt).not.toBeNull();
		expect(inbox.attempts).toBe(1);
	});

	it('derives URL-safe event ids', () => {
		expect.hasAssertions();
		expect(eventIdFor('SX30041207')).toBe('sx30041207');
		expect(eventIdFor('S.demo:42/x')).toBe('s-demo-42-x');
		expect(eventIdFor('A'.repeat(100))).toHaveLength(56);
	});
});

describe.each(FORMATS)('ingest (%s notices): idempotent and resumable', (format) => {
	const story = () => stories[format];
	it('the same IVORN twice gives one inbox row and one notice; the API answers 201 then 200', async () => {
		expect.hasAssertions();
		const xml = story().preliminary();
		const first = await submitNotice(xml, 'api', { fetch: fetchOpts });
		const second = await submitNotice(xml, 'api', { fetch: fetchOpts });
		expect(first.status).toBe(201);
		expect(first.outcome.outcome).toBe('event-created');
		expect(second).toMatchObject({ status: 200, duplicate: true, outcome: { outcome: 'already-processed', eventId: first.outcome.eventId, noticeId: first.outcome.noticeId } });
		expect(commitNotice(xml, 'vtp').duplicate).toBe(true);
		expect(database.select().from(table.noticeInbox).all()).toHaveLength(1);
		expect(database.select().from(table.notice).all()).toHaveLength(1);
		expect(database.select().from(table.skymap).all()).toHaveLength(1);
		expect(actions('board').filter((a) => a === 'notice.processed')).toHaveLength(1);
	});

	it('a row committed but never processed is completed by retryPending()', async () => {
		expect.hasAssertions();
		const c = commitNotice(story().preliminary(), 'vtp');
		expect(database.select().from(table.gwEvent).all()).toHaveLength(0);
		const done = await retryPending({ fetch: fetchOpts });
		expect(done.map((d) => d.inboxId)).toEqual([c.inboxId]);
		expect(database.select().from(table.gwEvent).all()).toHaveLength(1);
		expect(await retryPending({ fetch: fetchOpts })).toEqual([]);
	});

	it('a crash after the notice was stored and before the sky map is resumed without doubles', async () => {
		expect.hasAssertions();
		await crashAt('stored', story().initial());
		expect(database.select().from(table.notice).all()).toHaveLength(1);
		expect(database.select().from(table.skymap).all()).toHaveLength(0);
		expect(database.select().from(table.noticeInbox).get()!.processedAt).toBeNull();

		const [r] = await retryPending({ fetch: fetchOpts });
		expect(r.outcome).toBe('notice-added');
		expect(database.select().from(table.notice).all()).toHaveLength(1);
		expect(database.select().from(table.skymap).all()).toHaveLength(1);
		const inbox = database.select().from(table.noticeInbox).get()!;
		expect(inbox.attempts).toBe(2);
		expect(inbox.processedAt).not.toBeNull();
		expect(actions('board')).toEqual(['event.created', 'skymap.analysed', 'notice.processed']);
	});

	it('a crash after analysis reuses the stored sky map', async () => {
		expect.hasAssertions();
		await crashAt('analysed', story().initial());
		await retryPending({ fetch: fetchOpts });
		expect(database.select().from(table.skymap).all()).toHaveLength(1);
		expect(database.select().from(table.gwEvent).get()!.latestSkymapId).toBe(database.select().from(table.skymap).get()!.id);
	});
});

describe.each(FORMATS)('ingest (%s notices): history, supersede chain and retraction', (format) => {
	const story = () => stories[format];
	it('places notices by their own authored time whatever the arrival order', async () => {
		expect.hasAssertions();
		// Arrival: update (authored 08:15:30.5Z), preliminary (07:31:09Z), initial (08:02:00Z).
		const update = await ingest(story().update());
		const prelim = await ingest(story().preliminary());
		const initial = await ingest(story().initial());
		expect([update.outcome, prelim.outcome, initial.outcome]).toEqual(['event-created', 'notice-added', 'notice-added']);
		const event = database.select().from(table.gwEvent).get()!;
		expect(event.latestNoticeId).toBe(update.noticeId);
		expect(event.latestKind).toBe('update');
		expect(event.farHz).toBe(1.2e-12);
		// The VOEvent update names its own map; the JSON update carries none, so the initial's map stays shown.
		const latestMapNotice = format === 'voevent' ? update : initial;
		const latestMap = database.select().from(table.skymap).where(eq(table.skymap.noticeId, latestMapNotice.noticeId!)).get()!;
		expect(event.latestSkymapId).toBe(latestMap.id);
		expect(database.select().from(table.skymap).all()).toHaveLength(format === 'voevent' ? 3 : 2);
		const prelimMap = database.select().from(table.skymap).where(eq(table.skymap.noticeId, prelim.noticeId!)).get()!;
		expect(prelimMap.summary!.area90).toBeGreaterThan(latestMap.summary!.area90 * 5);
		const history = database.select().from(table.notice).orderBy(table.notice.authoredAt).all();
		expect(history.map((n) => n.kind)).toEqual(['preliminary', 'initial', 'update']);
		// JSON notices cite nothing: the order comes from the authored times alone.
		expect(history[2].supersedesIvorn).toBe(format === 'voevent' ? 'ivo://strainline.example/fake-broker#SX30041207-2-initial' : null);
		const latestFlags = log.filter((m): m is LiveMessage<'notice.processed'> => m.type === 'notice.processed' && m.room === 'board').map((m) => m.payload.latest);
		expect(latestFlags).toEqual([true, false, false]);
	});

	it('a retraction marks the event retracted once, says so on both rooms, and wins over later-arriving updates', async () => {
		expect.hasAssertions();
		await ingest(story().preliminary());
		const r = await ingest(story().retractionOfBns());
		expect(r.outcome).toBe('event-retracted');
		let event = database.select().from(table.gwEvent).get()!;
		expect(event.state).toBe('retracted');
		expect(event.retractedAt!.toISOString()).toBe('2030-04-12T08:10:00.000Z');
		expect(event.triage!.verdict).toBe('skip');
		expect(event.triage!.reasons[0]).toBe('retracted by the source → skip');
		// The content shown stays that of the last real notice.
		expect(event.classification!.BNS).toBe(0.962);
		const retracted = log.filter((m) => m.type === 'event.retracted');
		expect(retracted.map((m) => m.room).sort()).toEqual(['board', 'event:sx30041207']);
		// The source's stated reason and the claims freed (none here) travel with the message.
		// (A JSON retraction states no reason.)
		expect(retracted[0].payload).toEqual({ eventId: 'sx30041207', noticeId: r.noticeId, reason: story().retractionReason });
		const processed = log.filter((m) => m.type === 'notice.processed' && m.room === 'board').at(-1)!.payload;
		expect(processed).toMatchObject({ kind: 'retraction', significant: false, latest: true });

		// An update authored later than the retraction, arriving after it.
		await ingest(story().update());
		event = database.select().from(table.gwEvent).get()!;
		expect(event.state).toBe('retracted');
		expect(event.latestKind).toBe('update');
		expect(log.filter((m) => m.type === 'event.retracted')).toHaveLength(2);
		expect(log.filter((m) => m.type === 'notice.processed').at(-1)!.payload.significant).toBe(false);
	});

	it('a retraction arriving before any other notice still creates the event, retracted', async () => {
		expect.hasAssertions();
		const r = await ingest(story().retraction());
		expect(r.outcome).toBe('event-retracted');
		const event = database.select().from(table.gwEvent).get()!;
		expect(event).toMatchObject({ id: 'sx30041315', state: 'retracted', latestKind: 'retraction', farHz: null, latestSkymapId: null });
		expect(database.select().from(table.skymap).all()).toHaveLength(0);
		expect(actions('board')).toEqual(['event.created', 'event.retracted', 'notice.processed']);
	});

	it('keeps a test-role event, marked as such and not significant', async () => {
		expect.hasAssertions();
		await ingest(story().testRole());
		const event = database.select().from(table.gwEvent).get()!;
		expect(event.sourceEventId).toBe(format === 'voevent' ? 'SXT0001' : 'MSXT0001');
		expect(event.role).toBe('test');
		expect(event.triage!.reasons).toContain('role test ≠ observation → skip');
		expect(log.find((m) => m.type === 'notice.processed')!.payload).toMatchObject({ role: 'test', significant: false });
	});
});

describe('ingest: refusals', () => {
	it('keeps a malformed notice in the inbox with its error and tells the board', async () => {
		expect.hasAssertions();
		const r = await ingest(raw('malformed/unclosed-tag.xml'));
		expect(r.outcome).toBe('rejected');
		expect(r.error).toMatch(/malformed XML/);
		const inbox = database.select().from(table.noticeInbox).get()!;
		expect(inbox).toMatchObject({ ivorn: 'ivo://strainline.example/fake-broker#SX30041600-1-preliminary', error: r.error });
		expect(inbox.processedAt).not.toBeNull();
		expect(inbox.rawXml).toBe(raw('malformed/unclosed-tag.xml'));
		expect(database.select().from(table.gwEvent).all()).toHaveLength(0);
		expect(log.map((m) => [m.type, m.room])).toEqual([['notice.rejected', 'board']]);
		expect(log[0].payload).toEqual({ inboxId: inbox.id, ivorn: inbox.ivorn, error: r.error });
		// Not retried: it will not get better.
		expect(await retryPending()).toEqual([]);
		const api = await submitNotice(raw('malformed/unclosed-tag.xml'), 'api');
		expect(api.status).toBe(422);
		// A corrected notice under the same IVORN is taken, in the same inbox row.
		const fixed = notice('bns-preliminary.xml', [['SX30041207-1-preliminary', 'SX30041600-1-preliminary']]);
		const corrected = await submitNotice(fixed, 'api', { fetch: fetchOpts });
		expect(corrected).toMatchObject({ status: 201, duplicate: false, outcome: { inboxId: inbox.id, outcome: 'event-created' } });
		expect(database.select().from(table.noticeInbox).all()).toHaveLength(1);
		expect(database.select().from(table.noticeInbox).get()!.error).toBeNull();
	});

	it('a notice without a readable IVORN is kept under its content hash', async () => {
		expect.hasAssertions();
		const xml = '<nonsense>';
		const a = commitNotice(xml, 'vtp');
		expect(a.ivorn).toMatch(/^invalid:sha256:[0-9a-f]{64}$/);
		expect(commitNotice(xml, 'vtp')).toEqual({ ...a, duplicate: true });
		expect((await processInbox(a.inboxId)).outcome).toBe('rejected');
	});

	it('a sky map the host does not have yet is tried again later (1, 2, 4 … min), then analysed and shown, and the board told', async () => {
		expect.hasAssertions();
		// The broker serves no file under this name yet: 404, an HTTP error that may pass.
		const xml = notice('bns-initial.xml').replace('SX30041207-2.multiorder.fits.gz', 'SX30041207-late.multiorder.fits.gz');
		expect(xml).toContain('SX30041207-late.multiorder.fits.gz');
		const t0 = new Date();
		const r = await ingest(xml);
		expect(r.outcome).toBe('event-created');
		expect(r.error).toMatch(/answered 404 \(will try again\)$/);
		let row = database.select().from(table.skymap).get()!;
		expect(row).toMatchObject({ fetchAttempts: 1, summary: null });
		expect(row.retryAt!.getTime() - t0.getTime()).toBeGreaterThanOrEqual(59_000);
		expect(database.select().from(table.gwEvent).get()!.latestSkymapId).toBeNull();
		// Not due yet: nothing is tried.
		expect(await retrySkymaps({ fetch: fetchOpts, now: () => new Date(t0.getTime() + 30_000) })).toEqual([]);
		// Due, still missing: attempt 2, next wait 2 min.
		const t1 = new Date(t0.getTime() + 61_000);
		expect(await retrySkymaps({ fetch: fetchOpts, now: () => t1 })).toEqual([row.id]);
		row = database.select().from(table.skymap).get()!;
		expect(row.fetchAttempts).toBe(2);
		expect(row.retryAt!.getTime()).toBe(t1.getTime() + 120_000);
		// The host publishes it: the next due try analyses it in the same row and the event shows it.
		broker.addFile('SX30041207-late.multiorder.fits.gz', readFileSync(dir + 'skymap-demo.multiorder.fits.gz'));
		log = [];
		expect(await retrySkymaps({ fetch: fetchOpts, now: () => new Date(t1.getTime() + 121_000) })).toEqual([row.id]);
		row = database.select().from(table.skymap).get()!;
		expect(row).toMatchObject({ error: null, retryAt: null, fetchAttempts: 3 });
		expect(row.summary!.area90 / astropy.area90Deg2).toBeCloseTo(1, 6);
		expect(database.select().from(table.gwEvent).get()!.latestSkymapId).toBe(row.id);
		expect(actions('board')).toEqual(['skymap.analysed']);
		expect(log[0].payload).toMatchObject({ eventId: r.eventId, skymapId: row.id, retried: 3 });
		// Nothing left to try.
		expect(await retrySkymaps({ fetch: fetchOpts, now: () => new Date(t1.getTime() + 3_600_000) })).toEqual([]);
	});

	it('gives up after five downloads; a refused host is never tried again', async () => {
		expect.hasAssertions();
		const xml = notice('bns-initial.xml').replace('SX30041207-2.multiorder.fits.gz', 'SX30041207-never.multiorder.fits.gz');
		await ingest(xml);
		let at = Date.now();
		for (let k = 0; k < 10; k++) {
			at += 3_600_000;
			await retrySkymaps({ fetch: fetchOpts, now: () => new Date(at) });
		}
		const row = database.select().from(table.skymap).get()!;
		expect(row.fetchAttempts).toBe(5);
		expect(row.retryAt).toBeNull();
		expect(row.error).toMatch(/\(gave up after 5 attempts\)$/);
		// bbh-initial.xml names a host off the allow-list: refused once, with no retry planned.
		await ingest(raw('bbh-initial.xml'));
		const refused = database.select().from(table.skymap).where(eq(table.skymap.eventId, 'sx30041422')).get()!;
		expect(refused.retryAt).toBeNull();
		expect(refused.error).toMatch(/is not on the allow-list \(SKYMAP_HOSTS\)$/);
	});

	it('a sky map from a host off the allow-list is refused; the notice is still processed and says why', async () => {
		expect.hasAssertions();
		// bbh-initial.xml names https://maps.strainline.example/…, not on the list.
		const r = await ingest(raw('bbh-initial.xml'));
		expect(r.outcome).toBe('event-created');
		expect(r.error).toMatch(/maps\.strainline\.example is not on the allow-list/);
		const map = database.select().from(table.skymap).get()!;
		expect(map.summary).toBeNull();
		expect(map.error).toBe(r.error);
		expect(database.select().from(table.gwEvent).get()!.latestSkymapId).toBeNull();
		expect(database.select().from(table.noticeInbox).get()!.error).toBe(`sky map: ${r.error}`);
		expect(actions('board')).toEqual(['event.created', 'skymap.failed', 'notice.processed']);
		expect(log.find((m) => m.type === 'skymap.failed')!.payload).toEqual({ eventId: 'sx30041422', noticeId: r.noticeId, error: r.error });
		// BBH: P(NS) = HasNS = 0.
		expect(log.find((m) => m.type === 'notice.processed')!.payload).toMatchObject({ significant: false });
	});
});

describe('triage policy', () => {
	it('re-evaluates active events when the coordinators change a threshold', async () => {
		expect.hasAssertions();
		await ingest(notice('bns-initial.xml'));
		expect(database.select().from(table.gwEvent).get()!.triage!.verdict).toBe('follow');
		const n = updatePolicy({ userId: null, label: 'a coordinator' }, { ...DEFAULT_TRIAGE_POLICY, maxDistanceMpc: 50 });
		expect(n).toBe(1);
		const event = database.select().from(table.gwEvent).get()!;
		expect(event.triage!.verdict).toBe('skip');
		expect(event.triage!.reasons.find((x) => x.startsWith('distance'))).toMatch(/^distance 1\d\d Mpc > 50 Mpc → skip$/);
		expect(log.at(-1)).toMatchObject({ type: 'triage.policy-changed', room: 'board', payload: { policy: { maxDistanceMpc: 50 } } });
		// New notices are judged by the new policy too.
		await ingest(notice('bns-update.xml'));
		expect(database.select().from(table.gwEvent).get()!.triage!.verdict).toBe('skip');
	});
});

describe('ingest: sky maps that unpack too large', () => {
	it('refuses a map that inflates past the server limit (256 MiB unless SKYMAP_MAX_INFLATED_MB says otherwise), with the reason', async () => {
		expect.hasAssertions();
		expect(loadAlertsConfig().skymapMaxInflatedBytes).toBe(256 * 1024 * 1024);
		const inflated = gunzipSync(readFileSync(dir + 'skymap-demo.multiorder.fits.gz')).length;
		const saved = config.alerts.skymapMaxInflatedBytes;
		config.alerts.skymapMaxInflatedBytes = inflated - 2880;
		try {
			const r = await ingest(notice('bns-initial.xml'));
			expect(r.outcome).toBe('event-created');
			const row = database.select().from(table.skymap).get()!;
			expect(row.summary).toBeNull();
			expect(row.error).toMatch(/unpacks to more than .* MiB.*SKYMAP_MAX_INFLATED_MB/);
		} finally {
			config.alerts.skymapMaxInflatedBytes = saved;
		}
	});
});

// VOEvent 2.0 semantics (§3.7 Citations, §3.1.2 role) and stream vocabularies, end to end.
describe('ingest: VOEvent semantics and stream vocabularies', () => {
	const std = (name: string) => notice('standard/' + name);

	it('creates, updates (kind only in the citations) and retracts (empty What citing two packets) one event', async () => {
		expect.hasAssertions();
		const first = await ingest(std('namespaced.xml'));
		expect(first).toMatchObject({ outcome: 'event-created', eventId: 'sx30050101', error: null });
		const second = await ingest(std('supersedes-only.xml'));
		expect(second).toMatchObject({ outcome: 'notice-added', eventId: 'sx30050101' });
		let event = database.select().from(table.gwEvent).get()!;
		expect(event).toMatchObject({ latestKind: 'update', latestNoticeId: second.noticeId, farHz: 1.5e-11, state: 'active' });
		const third = await ingest(std('retraction-empty-what.xml'));
		expect(third).toMatchObject({ outcome: 'event-retracted', eventId: 'sx30050101' });
		event = database.select().from(table.gwEvent).get()!;
		expect(event).toMatchObject({ state: 'retracted', latestKind: 'retraction' });
		expect(database.select().from(table.gwEvent).all()).toHaveLength(1);
		const stored = database.select().from(table.notice).where(eq(table.notice.id, third.noticeId!)).get()!;
		expect(stored.citations).toHaveLength(2);
		const retracted = log.find((m) => m.type === 'event.retracted' && m.room === 'board')!;
		expect(retracted.payload).toMatchObject({ eventId: 'sx30050101', reason: 'Withdrawn: a data-quality flag was raised after the fact.' });
	});

	it('keeps a retraction that arrives before the packets it cites waiting, then reads it when one arrives', async () => {
		expect.hasAssertions();
		const early = await submitNotice(std('retraction-empty-what.xml'), 'api');
		expect(early.status).toBe(202);
		expect(early.outcome).toMatchObject({ outcome: 'waiting', eventId: null });
		expect(early.outcome.error).toMatch(/^waiting for the cited notices .*-1-preliminary, .*-2-revised/);
		const row = database.select().from(table.noticeInbox).get()!;
		expect(row.processedAt).toBeNull();
		expect(row.error).toBe(early.outcome.error);
		expect(database.select().from(table.gwEvent).all()).toHaveLength(0);
		// The periodic retry reads it again and it still waits.
		expect((await retryPending({ fetch: fetchOpts })).map((o) => o.outcome)).toEqual(['waiting']);

		// The first cited packet arrives: it is stored, and the waiting retraction is read at once.
		const parent = await ingest(std('namespaced.xml'));
		expect(parent.outcome).toBe('event-created');
		const event = database.select().from(table.gwEvent).get()!;
		expect(event.state).toBe('retracted');
		const after = database.select().from(table.noticeInbox).where(eq(table.noticeInbox.id, row.id)).get()!;
		expect(after.processedAt).not.toBeNull();
		expect(after.error).toBeNull();
		expect(database.select().from(table.notice).all().map((n) => n.kind).sort()).toEqual(['preliminary', 'retraction']);
	});

	it('keeps a follow-up beside the event: its content does not replace what the event shows', async () => {
		expect.hasAssertions();
		await ingest(std('namespaced.xml'));
		const followup = std('supersedes-only.xml')
			.replace('cite="supersedes"', 'cite="followup"')
			.replace('#SX30050101-2-revised', '#SX30050101-2-followup')
			.replace(/<Group type="Skymap">.*<\/Group>/, '')
			.replace(/<Group type="Classification">[\s\S]*?<\/Group>/, '');
		const r = await ingest(followup);
		expect(r.outcome).toBe('notice-added');
		const event = database.select().from(table.gwEvent).get()!;
		// FAR and classes stay those of the preliminary notice; the map too (the follow-up carries none).
		expect(event).toMatchObject({ latestKind: 'followup', farHz: 2.2e-10, classification: { BNS: 0.91, NSBH: 0.05, BBH: 0, Terrestrial: 0.04 } });
		const maps = database.select().from(table.skymap).all();
		expect(maps).toHaveLength(1);
		expect(event.latestSkymapId).toBe(maps[0].id);
	});

	it('stores test and utility notices as such and pages nobody, even under a policy that accepts any role', async () => {
		expect.hasAssertions();
		updatePolicy({ userId: null, label: 'a coordinator' }, { ...DEFAULT_TRIAGE_POLICY, requireObservationRole: false });
		for (const [name, role] of [['test-role.xml', 'test'], ['utility-role.xml', 'utility']] as const) {
			log = [];
			const r = await ingest(std(name));
			expect(r.outcome).toBe('event-created');
			const event = database.select().from(table.gwEvent).where(eq(table.gwEvent.id, r.eventId!)).get()!;
			expect(event.role).toBe(role);
			expect(event.triage!.verdict).toBe('follow');
			expect(log.find((m) => m.type === 'notice.processed' && m.room === 'board')!.payload).toMatchObject({ role, significant: false });
		}
	});

	it("reads a stream's renamed Params with that stream's vocabulary, and refuses them before it is set", async () => {
		expect.hasAssertions();
		const xml = std('renamed-params.xml');
		const refused = await ingest(xml);
		expect(refused.outcome).toBe('rejected');
		expect(refused.error).toMatch(/^missing required Param SourceEventId/);
		const vocabulary = vocabularySchema.parse(JSON.parse(raw('standard/renamed-params.vocabulary.json')));
		saveVocabulary('ivo://strainline.example/alt-pipeline', vocabulary, null);
		expect(vocabularyFor('ivo://strainline.example/alt-pipeline').names.far).toEqual(['FalseAlarmPerYear']);
		// Other streams keep the defaults.
		expect(vocabularyFor('ivo://strainline.example/fake-broker').names.far[0]).toBe('FalseAlarmRate');
		// The same text sent again is a repeat of a refused notice; processing it again from the inbox reads it.
		expect((await submitNotice(xml, 'api', { fetch: fetchOpts })).status).toBe(422);
		const r = await reprocessNotice(refused.inboxId, { fetch: fetchOpts });
		expect(r).toMatchObject({ outcome: 'event-created', eventId: 'a30050505' });
		const event = database.select().from(table.gwEvent).get()!;
		expect(event).toMatchObject({ id: 'a30050505', sourceEventId: 'A30050505', latestKind: 'initial', classification: { BNS: 0.6, NSBH: 0.3, BBH: 0.05, Terrestrial: 0.05 } });
		expect(event.farHz).toBeCloseTo(0.5 / 31557600, 20);
	});

	it('reads CDATA and whitespace, and a default-namespace envelope, into one event', async () => {
		expect.hasAssertions();
		broker.addFile('SX30050202-1.multiorder.fits.gz', readFileSync(dir + 'skymap-demo.multiorder.fits.gz'));
		broker.addFile('SX30050202-2.multiorder.fits.gz', readFileSync(dir + 'skymap-demo.multiorder.fits.gz'));
		expect((await ingest(std('default-namespace.xml'))).outcome).toBe('event-created');
		expect((await ingest(std('cdata-whitespace.xml'))).outcome).toBe('notice-added');
		const event = database.select().from(table.gwEvent).get()!;
		expect(event).toMatchObject({ id: 'sx30050202', latestKind: 'update', farHz: 3e-12 });
	});
});

describe('ingest: JSON notices carry their sky map', () => {
	it('stores and analyses the embedded map exactly like a fetched one, keeping the raw JSON and its format in the inbox', async () => {
		expect.hasAssertions();
		clearSkyMapCache();
		const text = json('bns-initial.json');
		const r = await ingest(text);
		expect(r).toMatchObject({ outcome: 'event-created', eventId: 'sx30041207', error: null });
		const inbox = database.select().from(table.noticeInbox).get()!;
		expect(inbox).toMatchObject({ format: 'json', rawXml: text, ivorn: 'ivo://json-notice/SX30041207#initial-2030-04-12T08:02:00.000Z', error: null });
		const map = database.select().from(table.skymap).get()!;
		// Same file, same place, same figures as the fetched map of the VOEvent test above.
		expect(map).toMatchObject({ sourceUrl: null, fetchAttempts: 0, error: null, retryAt: null, filePath: `skymaps/sx30041207/${r.noticeId}.fits.gz` });
		expect(map.bytes).toBe(readFileSync(dir + 'skymap-demo.multiorder.fits.gz').length);
		expect(map.summary!.area90 / astropy.area90Deg2).toBeCloseTo(1, 6);
		expect(map.summary!.area50 / astropy.area50Deg2).toBeCloseTo(1, 6);
		expect(storedFileExists(map.filePath!)).toBe(true);
		expect(skyMapById(map.id)).not.toBeNull();
		const event = database.select().from(table.gwEvent).get()!;
		expect(event).toMatchObject({ latestSkymapId: map.id, latestKind: 'initial', state: 'active' });
		expect(event.triage!.verdict).toBe('follow');
		const stored = database.select().from(table.notice).get()!;
		expect(stored.parsed).toMatchObject({ significant: true, instruments: ['H1', 'L1', 'V1'] });
		expect(actions('board')).toEqual(['event.created', 'skymap.analysed', 'notice.processed']);
	});

	it('the same map gives the same figures whether the notice carries it or names it', async () => {
		expect.hasAssertions();
		await ingest(notice('bns-initial.xml'));
		const fetched = database.select().from(table.skymap).get()!;
		database = createTestDatabase();
		await ingest(json('bns-initial.json'));
		const embedded = database.select().from(table.skymap).get()!;
		expect(embedded.summary).toEqual(fetched.summary);
		expect(embedded.sha256).toBe(fetched.sha256);
	});

	it('refuses a gzip bomb inside a notice with the reason, keeps it in the inbox, and takes it on reprocessing once the limit allows', async () => {
		expect.hasAssertions();
		const bomb = gzipSync(Buffer.alloc(12 * 1024 * 1024));
		const doc = JSON.parse(json('bns-update.json'));
		doc.event.skymap = bomb.toString('base64');
		const text = JSON.stringify(doc);
		const saved = config.alerts.skymapMaxInflatedBytes;
		config.alerts.skymapMaxInflatedBytes = 4 * 1024 * 1024;
		let inboxId: number;
		try {
			const api = await submitNotice(text, 'api', { format: 'json' });
			expect(api.status).toBe(422);
			expect(api.outcome.error).toBe('the sky map inside the notice unpacks to more than 4 MiB, the limit for a sky map');
			inboxId = api.outcome.inboxId;
			expect(database.select().from(table.noticeInbox).get()).toMatchObject({ format: 'json', rawXml: text, error: api.outcome.error });
			expect(database.select().from(table.gwEvent).all()).toHaveLength(0);
		} finally {
			config.alerts.skymapMaxInflatedBytes = saved;
		}
		// Under the normal limit the same row is taken; the zeros are no sky map, which the event says.
		const again = await reprocessNotice(inboxId);
		expect(again).toMatchObject({ outcome: 'event-created', eventId: 'sx30041207' });
		expect(again!.error).toMatch(/^the sky map could not be analysed: /);
		expect(database.select().from(table.noticeInbox).all()).toHaveLength(1);
	});

	it('a broken JSON notice is kept under its content hash with the reason; a JSON resend is a repeat', async () => {
		expect.hasAssertions();
		const broken = await submitNotice('{"superevent_id": "SX1", ', 'api', { format: 'json' });
		expect(broken.status).toBe(422);
		expect(broken.outcome.error).toMatch(/^notice is not valid JSON: /);
		expect(database.select().from(table.noticeInbox).get()!.ivorn).toMatch(/^invalid:sha256:/);
		const first = await submitNotice(json('bns-update.json'), 'api', { format: 'json' });
		const resent = await submitNotice(json('bns-update.json'), 'api');
		expect(first.status).toBe(201);
		expect(resent).toMatchObject({ status: 200, duplicate: true });
	});
});
