import { beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { loadSessionUser, type SessionUser } from '../people/auth';
import { archive, readArchiveFilters } from './archive';
import { closeEvent } from './close';
import type { CloseReason } from '../../event-view.ts';

let n = 0;
let coordinator: SessionUser;
let north: string;
let south: string;
let scopeNorth: string;
let scopeSouth: string;

function team(name: string) {
	const id = `team-${++n}`;
	db.insert(table.team).values({ id, name, region: 'Test' }).run();
	const telescopeId = `tel-${++n}`;
	db.insert(table.telescope)
		.values({ id: telescopeId, teamId: id, name: `${name} 1 m`, siteName: 'Test', latitudeDeg: 0, longitudeDeg: 0, elevationM: 0, apertureM: 1, fovShape: 'circle', fovWidthDeg: 1, fovHeightDeg: 1, filters: ['r'], limitingMag: 21, limitingMagExposureS: 60 })
		.run();
	return [id, telescopeId];
}

/** A closed event with a merger time, a most probable class, a 90% area, a close reason, and teams that claimed or observed. */
function closedEvent(o: { merger: string | null; cls: Partial<table.Classification>; area90: number | null; reason: CloseReason; claimedBy?: [string, string]; observedBy?: [string, string]; state?: 'active' | 'closed' }) {
	const id = `ev-${++n}`;
	db.insert(table.gwEvent)
		.values({ id, sourceEventId: `S-arch-${n}`, role: 'observation', state: 'active', eventTime: o.merger ? new Date(o.merger) : null, classification: { BNS: null, NSBH: null, BBH: null, Terrestrial: null, ...o.cls } })
		.run();
	if (o.area90 !== null) {
		const noticeId = `no-${++n}`;
		db.insert(table.notice).values({ id: noticeId, eventId: id, ivorn: `ivo://test.invalid/arch#${noticeId}`, kind: 'initial', role: 'observation', authoredAt: new Date(), citations: [], parsed: {} }).run();
		const summary = { area50: o.area90 / 4, area90: o.area90, area99: o.area90 * 2, distanceMean: null, distanceStd: null, pixels: 1, maxOrder: 1, probabilitySum: 1, peak: { ra: 0, dec: 0 }, ordering: 'NUNIQ', warnings: [] };
		db.insert(table.skymap).values({ id: `sm-${n}`, eventId: id, noticeId, summary }).run();
		db.update(table.gwEvent).set({ latestSkymapId: `sm-${n}` }).where(eq(table.gwEvent.id, id)).run();
	}
	const now = new Date();
	if (o.claimedBy)
		db.insert(table.claim).values({ id: `cl-${++n}`, eventId: id, targetKind: 'field', targetId: 'F1', telescopeId: o.claimedBy[1], teamId: o.claimedBy[0], state: 'done', claimedAt: now }).run();
	if (o.observedBy)
		db.insert(table.observation)
			.values({ id: `ob-${++n}`, eventId: id, telescopeId: o.observedBy[1], teamId: o.observedBy[0], observedAt: now, raDeg: 1, decDeg: 1, filter: 'r', exposureS: 60, limitingMag: 20, source: 'form' })
			.run();
	if (o.state !== 'active') closeEvent(coordinator, id, { reason: o.reason });
	return id;
}

let ids: Record<string, string>;

beforeEach(() => {
	createTestDatabase();
	db.insert(table.user).values({ id: 'coord', email: 'coord@arch.test', name: 'Cora Coordinator', passwordHash: 'unused' }).run();
	db.insert(table.userRole).values({ userId: 'coord', role: 'coordinator' }).run();
	coordinator = loadSessionUser('coord')!;
	[north, scopeNorth] = team('North Ridge (test)');
	[south, scopeSouth] = team('South Flats (test)');
	ids = {
		bnsSmall: closedEvent({ merger: '2026-03-10T04:00:00Z', cls: { BNS: 0.9, Terrestrial: 0.1 }, area90: 30, reason: 'counterpart-found', claimedBy: [north, scopeNorth] }),
		bnsLarge: closedEvent({ merger: '2026-05-01T23:59:59Z', cls: { BNS: 0.6, NSBH: 0.3 }, area90: 900, reason: 'search-complete', observedBy: [south, scopeSouth] }),
		bbh: closedEvent({ merger: '2026-05-02T00:00:00Z', cls: { BBH: 0.99 }, area90: 250, reason: 'not-pursued' }),
		nsbh: closedEvent({ merger: '2026-08-20T12:00:00Z', cls: { NSBH: 0.7, BNS: 0.2 }, area90: null, reason: 'retracted', claimedBy: [north, scopeNorth], observedBy: [south, scopeSouth] }),
		noMerger: closedEvent({ merger: null, cls: {}, area90: 75, reason: 'search-complete' }),
		open: closedEvent({ merger: '2026-06-01T00:00:00Z', cls: { BNS: 0.95 }, area90: 40, reason: 'search-complete', claimedBy: [north, scopeNorth], state: 'active' })
	};
});

const found = (f: Parameters<typeof archive>[0]) => archive(f).rows.map((r) => r.eventId);

describe('the archive', () => {
	it('lists closed events only, newest merger first, with who closed them and why', () => {
		const a = archive();
		expect(a.total).toBe(5);
		expect(a.rows.map((r) => r.eventId)).not.toContain(ids.open);
		// The event without a merger time sorts by arrival (just now), so first.
		expect(a.rows.map((r) => r.eventId)).toEqual([ids.noMerger, ids.nsbh, ids.bbh, ids.bnsLarge, ids.bnsSmall]);
		const row = a.rows.find((r) => r.eventId === ids.bnsSmall)!;
		expect(row).toMatchObject({ sourceClass: { name: 'BNS', probability: 0.9 }, area90Deg2: 30, closure: { reason: 'counterpart-found', by: 'Cora Coordinator', note: null } });
		expect(row.teams.map((t) => t.name)).toEqual(['North Ridge (test)']);
		expect(a.rows.find((r) => r.eventId === ids.nsbh)!.teams.map((t) => t.name)).toEqual(['North Ridge (test)', 'South Flats (test)']);
	});

	it('filters by merger date, the end day included, leaving out events without a merger time', () => {
		expect(found({ from: '2026-05-01', to: '2026-05-01' })).toEqual([ids.bnsLarge]);
		expect(found({ from: '2026-05-02' })).toEqual([ids.nsbh, ids.bbh]);
		expect(found({ to: '2026-04-30' })).toEqual([ids.bnsSmall]);
	});

	it('filters by most probable source class, 90% area range, outcome and team', () => {
		expect(found({ sourceClass: 'BNS' })).toEqual([ids.bnsLarge, ids.bnsSmall]);
		expect(found({ sourceClass: 'NSBH' })).toEqual([ids.nsbh]);
		expect(found({ areaMin: 30, areaMax: 250 })).toEqual([ids.noMerger, ids.bbh, ids.bnsSmall]);
		expect(found({ areaMin: 251 })).toEqual([ids.bnsLarge]);
		expect(found({ outcome: 'search-complete' })).toEqual([ids.noMerger, ids.bnsLarge]);
		expect(found({ teamId: north })).toEqual([ids.nsbh, ids.bnsSmall]);
		expect(found({ teamId: south })).toEqual([ids.nsbh, ids.bnsLarge]);
		expect(found({ teamId: south, sourceClass: 'BNS', outcome: 'search-complete', from: '2026-01-01' })).toEqual([ids.bnsLarge]);
	});

	it('pages through the matches, clamping a page past the end', () => {
		const first = archive({}, 2);
		expect(first).toMatchObject({ total: 5, pages: 3, page: 1 });
		expect(first.rows.map((r) => r.eventId)).toEqual([ids.noMerger, ids.nsbh]);
		expect(archive({ page: 3 }, 2).rows.map((r) => r.eventId)).toEqual([ids.bnsSmall]);
		expect(archive({ page: 9 }, 2).page).toBe(3);
	});

	it('reads its filters from the query string, naming each refused value and applying the rest', () => {
		const ok = readArchiveFilters(new URLSearchParams({ from: '2026-05-01', sourceClass: 'BBH', areaMin: '10', outcome: 'not-pursued', page: '2' }));
		expect(ok).toEqual({ filters: { from: '2026-05-01', sourceClass: 'BBH', areaMin: 10, outcome: 'not-pursued', page: 2 }, errors: {} });
		const bad = readArchiveFilters(new URLSearchParams({ from: '1 May', to: '2026-02-30', sourceClass: 'XYZ', areaMin: 'big', areaMax: '-1', outcome: 'done', page: '0', teamId: '' }));
		expect(bad.filters).toEqual({});
		expect(bad.errors).toEqual({
			from: 'Give the date as YYYY-MM-DD.',
			to: 'That date does not exist.',
			sourceClass: 'Source class must be one of BNS, NSBH, BBH, Terrestrial.',
			areaMin: 'Give the area as a number of square degrees.',
			areaMax: 'The area cannot be negative.',
			outcome: 'Choose one of the listed outcomes.',
			page: 'Pages start at 1.'
		});
		const crossed = readArchiveFilters(new URLSearchParams({ from: '2026-06-01', to: '2026-05-01', areaMin: '100', areaMax: '10' }));
		expect(crossed.filters).toEqual({ from: '2026-06-01', areaMin: 100 });
		expect(crossed.errors).toEqual({ to: 'The end date is before the start date.', areaMax: 'The largest area is smaller than the smallest.' });
	});
});
