import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, afterEach, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { useStorageRoot } from '../platform/storage';
import { stopFakeSmtp } from '../platform/fake-smtp';
import { onRecorded, type LiveMessage } from '../platform/realtime';
import { DomainError } from '../platform/errors';
import { commitNotice, processInbox } from '../alerts/ingest';
import { getEvent } from '../alerts/events';
import { eventDetail } from '../alerts/board';
import * as claims from '../coordination/claims';
import { report, reportMany } from '../coordination/observations';
import { reportCandidate } from '../candidates/candidates';
import { addPhotometryCsv, addPhotometryRows } from '../candidates/photometry';
import { currentTake, takeCandidate } from '../candidates/takers';
import { clearVettingCache, vettingIdle } from '../candidates/vetting';
import { giveGalaxies, NOW, world, type World } from '../candidates/testing';
import { closeEvent, reopenEvent } from './close';
import { refusalOf } from '../platform/testing/refusal';

let storage: string;
let w: World;
let galaxyIds: number[];
let heard: LiveMessage[] = [];
let off: (() => void) | null = null;

beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-close-'));
	useStorageRoot(storage);
});
afterAll(async () => {
	await vettingIdle();
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
	await stopFakeSmtp();
});
beforeEach(() => {
	createTestDatabase();
	clearVettingCache();
	w = world();
	galaxyIds = giveGalaxies(w.eventId, w.skymapId, [
		{ name: 'NGC-test-1', raDeg: 150.2, decDeg: -29.9, distanceMpc: 160 },
		{ name: 'NGC-test-2', raDeg: 150.6, decDeg: -30.2, distanceMpc: 150 }
	]);
	heard = [];
	off = onRecorded((m) => heard.push(m));
});
afterEach(() => off?.());

const CLOSED_AT = new Date('2026-12-09T02:00:00Z');

function refusal(f: () => unknown): DomainError {
	try {
		f();
	} catch (e) {
		if (e instanceof DomainError) return e;
		throw e;
	}
	throw new Error('expected a refusal');
}

/** `refusal` for a call that settles later (a photometry CSV is read on the work pool). */
const refused = (p: Promise<unknown>) => refusalOf(p, DomainError);

const pointing = (o: Partial<Parameters<typeof report>[1]> = {}) => ({
	eventId: w.eventId,
	telescopeId: w.telescopeId,
	observedAt: '2026-12-08T23:00:00Z',
	raDeg: 150.2,
	decDeg: -29.9,
	filter: 'r',
	exposureS: 120,
	limitingMag: 20.5,
	...o
});

function closeAsSearchComplete(note: string | null = 'Covered 92% of the map.') {
	return closeEvent(w.coordinator, w.eventId, { reason: 'search-complete', note }, CLOSED_AT);
}

describe('closing an event', () => {
	it('stores reason, note, who and when, answers with the API event shape, and logs event.closed to the board and the event room', () => {
		const { event } = closeAsSearchComplete();
		expect(event.state).toBe('closed');
		expect(event.closedAt).toBe(CLOSED_AT.toISOString());
		expect(event.closure).toEqual({ reason: 'search-complete', note: 'Covered 92% of the map.', by: w.coordinator.name, at: CLOSED_AT.toISOString() });
		expect(event).toEqual(getEvent(w.eventId));
		const row = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, w.eventId)).get()!;
		expect(row).toMatchObject({ state: 'closed', closeReason: 'search-complete', closeNote: 'Covered 92% of the map.', closedBy: w.coordinator.id });
		const closed = heard.filter((m) => m.type === 'event.closed');
		expect(closed.map((m) => m.room).sort()).toEqual(['board', `event:${w.eventId}`]);
		expect(closed[0].payload).toEqual({ eventId: w.eventId, reason: 'search-complete', note: 'Covered 92% of the map.', by: w.coordinator.name });
		expect(closed[0].actor).toBe(w.coordinator.name);
		// The page's view carries the same closure.
		expect(eventDetail(w.eventId)!.closure).toEqual(event.closure);
	});

	it('releases every open claim (claimed and observing), leaves finished ones alone, and logs each with the reason', () => {
		const a = claims.claim(w.observer, { eventId: w.eventId, targetKind: 'galaxy', targetId: String(galaxyIds[0]), telescopeId: w.telescopeId }, NOW);
		const b = claims.claim(w.observer, { eventId: w.eventId, targetKind: 'galaxy', targetId: String(galaxyIds[1]), telescopeId: w.telescopeId }, NOW);
		claims.start(w.observer, b.id, NOW);
		const c = claims.claim(w.observer, { eventId: w.eventId, targetKind: 'galaxy', targetId: String(galaxyIds[0]), telescopeId: w.telescopeId, filter: 'g' }, NOW);
		claims.complete(w.observer, c.id, NOW);
		const { releasedClaimIds } = closeAsSearchComplete();
		expect(releasedClaimIds.sort()).toEqual([a.id, b.id].sort());
		expect(claims.getClaim(a.id)?.state).toBe('released');
		expect(claims.getClaim(b.id)?.state).toBe('released');
		expect(claims.getClaim(c.id)?.state).toBe('done');
		const released = heard.filter((m) => m.type === 'claim.released');
		expect(released).toHaveLength(2);
		for (const m of released) expect(m.payload).toMatchObject({ eventId: w.eventId, state: 'released', reason: 'event closed (search complete)' });
	});

	it('ends the open spectrum take of every candidate of the event and logs candidate.released', () => {
		const take = takeCandidate(w.spectroA, w.candidateId, { note: 'tonight' }, NOW);
		const { releasedTakeIds } = closeAsSearchComplete();
		expect(releasedTakeIds).toEqual([take.id]);
		expect(currentTake(w.candidateId)).toBeNull();
		const released = heard.filter((m) => m.type === 'candidate.released');
		expect(released).toHaveLength(1);
		expect(released[0].payload).toMatchObject({ candidateId: w.candidateId, takeId: take.id, userId: w.spectroA.id });
	});

	it('refuses to close twice (409 naming who closed it), and refuses people who are not coordinators (403)', () => {
		closeAsSearchComplete();
		const again = refusal(() => closeEvent(w.coordinator, w.eventId, { reason: 'not-pursued' }));
		expect(again.status).toBe(409);
		expect(again.code).toBe('already_closed');
		expect(again.message).toContain(w.coordinator.name);
		expect(again.message).toContain('search complete');
		expect(db.select().from(table.gwEvent).where(eq(table.gwEvent.id, w.eventId)).get()!.closeReason).toBe('search-complete');
		for (const who of [w.observer, w.duty, w.spectroA, w.viewer]) {
			expect(refusal(() => closeEvent(who, w.eventId, { reason: 'search-complete' })).status).toBe(403);
			expect(refusal(() => reopenEvent(who, w.eventId, {})).status).toBe(403);
		}
	});

	it('refuses an unknown reason, a note too long and an unknown event, storing nothing', () => {
		const bad = refusal(() => closeEvent(w.coordinator, w.eventId, { reason: 'bored' as never }));
		expect(bad.status).toBe(422);
		expect(bad.fields.reason).toMatch(/Reason must be one of search-complete, retracted, not-pursued, counterpart-found/);
		expect(refusal(() => closeEvent(w.coordinator, w.eventId, { reason: 'search-complete', note: 'x'.repeat(2001) })).fields.note).toMatch(/at most 2000/);
		expect(refusal(() => closeEvent(w.coordinator, 'no-such-event', { reason: 'search-complete' })).status).toBe(404);
		expect(getEvent(w.eventId)!.state).toBe('active');
		expect(heard.filter((m) => m.type === 'event.closed')).toHaveLength(0);
	});
});

describe('while an event is closed', () => {
	beforeEach(() => {
		closeAsSearchComplete();
	});

	function expectClosedRefusal(e: DomainError) {
		expect(e.status).toBe(409);
		expect(e.code).toBe('event_closed');
		expect(e.message).toContain(`closed by ${w.coordinator.name} at 2026-12-09T02:00:00Z (search complete)`);
		expect(e.message).toContain('Ask a coordinator to reopen it.');
	}

	it('refuses claims', () => {
		const e = refusal(() => claims.claim(w.observer, { eventId: w.eventId, targetKind: 'galaxy', targetId: String(galaxyIds[0]), telescopeId: w.telescopeId }, NOW));
		expectClosedRefusal(e);
		expect(e.message).toContain('its targets are no longer claimed');
		expect(claims.listClaims(w.eventId)).toHaveLength(0);
	});

	it('refuses pointings, one by one and as an upload (one sentence, not one per line)', async () => {
		const one = refusal(() => report({ user: w.observer }, pointing(), 'form', NOW));
		expectClosedRefusal(one);
		expect(one.message).toContain('new pointings are not recorded');
		const many = await refused(reportMany({ user: w.observer }, [pointing(), pointing({ observedAt: '2026-12-08T23:10:00Z' })], 'csv', { lines: [2, 3], now: NOW }));
		expectClosedRefusal(many);
		expect(db.select().from(table.observation).all()).toHaveLength(0);
	});

	it('refuses new candidates', () => {
		const e = refusal(() =>
			reportCandidate({ user: w.observer }, { eventId: w.eventId, name: 'AT-late', raDeg: 150.3, decDeg: -29.8, discoveredAt: '2026-12-08T22:00:00Z', magnitude: 20, filter: 'r', telescopeId: w.telescopeId }, NOW)
		);
		expectClosedRefusal(e);
		expect(e.message).toContain('new candidates are not taken');
		expect(db.select().from(table.candidate).all()).toHaveLength(1);
	});

	it('refuses photometry, as CSV and as JSON rows', async () => {
		const csv = await refused(addPhotometryCsv({ user: w.observer }, w.candidateId, 'time,filter,mag,mag_err,limit\n2026-12-08T22:00:00Z,r,20.1,0.05,\n', NOW));
		expectClosedRefusal(csv);
		expect(csv.message).toContain('new photometry is not taken');
		const rows = refusal(() => addPhotometryRows({ user: w.observer }, w.candidateId, { rows: [{ time: '2026-12-08T22:00:00Z', filter: 'r', mag: 20.1, mag_err: 0.05 }] }, NOW));
		expectClosedRefusal(rows);
		expect(db.select().from(table.candidatePhotometry).all()).toHaveLength(0);
	});

	it('refuses taking a candidate for a spectrum', () => {
		expectClosedRefusal(refusal(() => takeCandidate(w.spectroA, w.candidateId, {}, NOW)));
		expect(currentTake(w.candidateId)).toBeNull();
	});
});

describe('reopening', () => {
	it('clears the closure, logs event.reopened with the note, and takes work again', () => {
		closeAsSearchComplete();
		const reopenedAt = new Date('2026-12-09T02:30:00Z');
		const event = reopenEvent(w.coordinator, w.eventId, { note: 'A new candidate came in from a partner.' }, reopenedAt);
		expect(event.state).toBe('active');
		expect(event.closedAt).toBeNull();
		expect(event.closure).toBeNull();
		const row = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, w.eventId)).get()!;
		expect(row).toMatchObject({ closeReason: null, closeNote: null, closedBy: null });
		const reopened = heard.filter((m) => m.type === 'event.reopened');
		expect(reopened.map((m) => m.room).sort()).toEqual(['board', `event:${w.eventId}`]);
		expect(reopened[0].payload).toEqual({ eventId: w.eventId, note: 'A new candidate came in from a partner.', by: w.coordinator.name });
		const r = report({ user: w.observer }, pointing(), 'form', NOW);
		expect(r.observation.eventId).toBe(w.eventId);
		expect(claims.claim(w.observer, { eventId: w.eventId, targetKind: 'galaxy', targetId: String(galaxyIds[1]), telescopeId: w.telescopeId }, NOW).state).toBe('claimed');
	});

	it('refuses an event that is not closed (409) and stores an empty note as none', () => {
		const e = refusal(() => reopenEvent(w.coordinator, w.eventId, {}));
		expect(e.status).toBe(409);
		expect(e.code).toBe('not_closed');
		closeAsSearchComplete(null);
		expect(getEvent(w.eventId)!.closure!.note).toBeNull();
		reopenEvent(w.coordinator, w.eventId, { note: '   ' });
		expect(heard.find((m) => m.type === 'event.reopened')!.payload).toMatchObject({ note: null });
	});
});

describe('retracted events', () => {
	const retractionXml = (source: string) =>
		readFileSync(fileURLToPath(new URL('../../../../tests/fixtures/notices/retraction.xml', import.meta.url)), 'utf8').replaceAll('SX30041315', source);

	it('may be closed as retracted, and reopen as retracted', () => {
		db.update(table.gwEvent).set({ state: 'retracted', retractedAt: new Date('2026-12-08T00:00:00Z') }).where(eq(table.gwEvent.id, w.eventId)).run();
		expect(closeEvent(w.coordinator, w.eventId, { reason: 'retracted' }, CLOSED_AT).event.state).toBe('closed');
		expect(reopenEvent(w.coordinator, w.eventId, {}).state).toBe('retracted');
	});

	it('stay closed when a retraction notice arrives after the close, and the retraction is still logged', async () => {
		closeAsSearchComplete();
		const r = await processInbox(commitNotice(retractionXml(w.sourceEventId), 'api').inboxId);
		expect(r.outcome).toBe('event-retracted');
		const event = getEvent(w.eventId)!;
		expect(event.state).toBe('closed');
		expect(event.retractedAt).not.toBeNull();
		expect(heard.filter((m) => m.type === 'event.retracted' && m.room === 'board')).toHaveLength(1);
		expect(eventDetail(w.eventId)!.retractionReason).toBe('Retracted: instrumental artefact.');
		expect(reopenEvent(w.coordinator, w.eventId, {}).state).toBe('retracted');
	});
});
