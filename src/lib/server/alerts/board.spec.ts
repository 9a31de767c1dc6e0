import { beforeEach, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { createUser } from '../people/people';
import { boardEvents, eventDetail, RETRACTED_VISIBLE_MS } from './board';

const t0 = new Date('2026-03-01T12:00:00Z');
const MIN = 60_000;

function event(id: string, o: Partial<table.GwEvent> = {}) {
	db.insert(table.gwEvent)
		.values({ id, sourceEventId: `S-${id}`, role: 'observation', state: 'active', createdAt: t0, ...o })
		.run();
}

function notice(id: string, eventId: string, kind: table.Notice['kind'], authoredAt: Date) {
	db.insert(table.notice)
		.values({ id, eventId, ivorn: `ivo://test.invalid/board#${id}`, kind, role: 'observation', authoredAt, citations: [], parsed: {} })
		.run();
}

beforeEach(() => {
	createTestDatabase();
});

describe('board events', () => {
	it('lists active events newest merger first and keeps a retraction on the board for a day', () => {
		expect.hasAssertions();
		event('old', { eventTime: new Date(t0.getTime() - 60 * MIN) });
		event('new', { eventTime: new Date(t0.getTime() - 5 * MIN) });
		event('gone', { eventTime: t0, state: 'retracted', retractedAt: new Date(t0.getTime() - RETRACTED_VISIBLE_MS - MIN) });
		event('pulled', { eventTime: new Date(t0.getTime() - 30 * MIN), state: 'retracted', retractedAt: new Date(t0.getTime() - 10 * MIN) });
		event('done', { eventTime: t0, state: 'closed' });
		expect(boardEvents(t0).map((e) => e.id)).toEqual(['new', 'pulled', 'old']);
	});

	it('shows the sky map in force, the notice history in order and the acknowledgement', async () => {
		expect.hasAssertions();
		event('e1', { eventTime: t0, latestKind: 'update', latestNoticeId: 'n2', latestSkymapId: 'm2' });
		notice('n2', 'e1', 'update', new Date(t0.getTime() + 2 * MIN));
		notice('n1', 'e1', 'preliminary', new Date(t0.getTime() + MIN));
		const summary = (area90: number): table.SkymapSummary => ({
			area50: area90 / 4,
			area90,
			area99: area90 * 2,
			distanceMean: 120,
			distanceStd: 25,
			pixels: 3072,
			maxOrder: 8,
			probabilitySum: 1,
			peak: { ra: 10, dec: -20 },
			ordering: 'NUNIQ',
			warnings: ['test warning']
		});
		db.insert(table.skymap).values({ id: 'm1', eventId: 'e1', noticeId: 'n1', summary: summary(900), createdAt: t0 }).run();
		db.insert(table.skymap).values({ id: 'm2', eventId: 'e1', noticeId: 'n2', summary: summary(30), createdAt: new Date(t0.getTime() + 2 * MIN) }).run();
		const userId = await createUser({ email: 'board@duty.test', name: 'Board Person', password: 'long-enough-pw', roles: ['duty'] });
		db.insert(table.dutyPage).values({ id: 'p1', eventId: 'e1', noticeId: 'n1', userId, level: 0, sentAt: t0 }).run();

		const [view] = boardEvents(t0);
		expect(view.skymap).toMatchObject({ noticeId: 'n2', area90Deg2: 30, distanceMeanMpc: 120, peak: { raDeg: 10, decDeg: -20 } });
		expect(view.notices.map((n) => [n.kind, n.area90Deg2])).toEqual([
			['preliminary', 900],
			['update', 30]
		]);
		expect(view.ack).toMatchObject({ state: 'open', waitingOn: ['Board Person'], openSince: t0.toISOString() });

		db.update(table.dutyPage).set({ acknowledgedAt: new Date(t0.getTime() + MIN), acknowledgedBy: userId, latencyS: 61 }).run();
		const detail = eventDetail('e1')!;
		expect(detail.ack).toMatchObject({ state: 'acknowledged', acknowledgedBy: 'Board Person', latencyS: 61 });
		expect(detail.pages).toHaveLength(1);
		expect(detail.skymaps.map((m) => m.id)).toEqual(['m1', 'm2']);
		expect(detail.escalateAfterMin).toBe(10);
		expect(eventDetail('nope')).toBeNull();
	});
});
