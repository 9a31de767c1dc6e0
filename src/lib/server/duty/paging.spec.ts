import { afterAll, afterEach, beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { createUser } from '../people/people';
import { receivedMail, stopFakeSmtp, type ReceivedMail } from '../platform/fake-smtp';
import { record, SYSTEM, type LivePayloads } from '../platform/realtime';
import { config } from '../platform/config';
import * as duty from './paging';

const MIN = 60_000;
const HOUR = 60 * MIN;

let uninstall: (() => void) | null = null;
let seq = 0;

/** A unique address per test, since the fake SMTP server keeps every message of the run. */
const unique = (name: string) => `${name.toLowerCase().replace(/[^a-z]+/g, '-')}-${++seq}@duty.test`;

async function person(name: string, roles: table.Role[]) {
	const email = unique(name);
	const id = await createUser({ email, name, password: 'long-enough-pw', roles });
	return { id, email, name };
}

function shift(userId: string, startsAt: Date, endsAt: Date, rank: number) {
	return duty.addShift(SYSTEM, { userId, startsAt, endsAt, rank });
}

/** An event with one notice that arrived in the inbox at `receivedAt`, plus its sky-map summary. */
function insertEvent(o: { receivedAt: Date; kind?: table.Notice['kind']; farHz?: number; area90?: number; role?: table.Notice['role'] }) {
	const n = ++seq;
	const eventId = `ev${n}`;
	const noticeId = `no${n}`;
	const ivorn = `ivo://test.invalid/duty#S-unit-${n}`;
	db.insert(table.gwEvent)
		.values({ id: eventId, sourceEventId: `S-unit-${n}`, role: o.role ?? 'observation', state: 'active', eventTime: new Date(o.receivedAt.getTime() - 40_000) })
		.run();
	const inbox = db.insert(table.noticeInbox).values({ ivorn, rawXml: '<voe/>', via: 'vtp', receivedAt: o.receivedAt }).returning().get();
	db.insert(table.notice)
		.values({
			id: noticeId,
			eventId,
			inboxId: inbox.id,
			ivorn,
			kind: o.kind ?? 'initial',
			role: o.role ?? 'observation',
			authoredAt: new Date(o.receivedAt.getTime() - 5_000),
			farHz: o.farHz ?? 1 / (100 * 3.15576e7),
			classification: { BNS: 0.97, NSBH: 0.02, BBH: 0, Terrestrial: 0.01 },
			citations: [],
			parsed: {},
			createdAt: new Date(o.receivedAt.getTime() + 2_000)
		})
		.run();
	db.insert(table.skymap)
		.values({
			id: `sm${n}`,
			eventId,
			noticeId,
			summary: {
				area50: 30,
				area90: o.area90 ?? 123.4,
				area99: 400,
				distanceMean: 165.2,
				distanceStd: 44.6,
				pixels: 3072,
				maxOrder: 8,
				probabilitySum: 1,
				peak: { ra: 197.8, dec: -23.1 },
				ordering: 'NUNIQ',
				warnings: []
			}
		})
		.run();
	db.update(table.gwEvent).set({ latestNoticeId: noticeId, latestKind: o.kind ?? 'initial', latestSkymapId: `sm${n}` }).where(eq(table.gwEvent.id, eventId)).run();
	return { eventId, noticeId, sourceEventId: `S-unit-${n}` };
}

function processed(eventId: string, noticeId: string, significant: boolean) {
	const payload: LivePayloads['notice.processed'] = { eventId, noticeId, ivorn: 'x', kind: 'initial', role: 'observation', significant, triage: { verdict: significant ? 'follow' : 'skip', reasons: [] }, latest: true };
	// Logged in both rooms, as ingestion does; paging must happen once.
	record(SYSTEM, 'notice.processed', 'board', payload);
	record(SYSTEM, 'notice.processed', `event:${eventId}`, payload);
}

async function mailTo(email: string, timeoutMs = 3000): Promise<ReceivedMail[]> {
	const until = Date.now() + timeoutMs;
	while (Date.now() < until) {
		const got = receivedMail().filter((m) => m.to.includes(email));
		if (got.length) return got;
		await new Promise((r) => setTimeout(r, 20));
	}
	return [];
}

function pages(eventId: string) {
	return db.select().from(table.dutyPage).where(eq(table.dutyPage.eventId, eventId)).all();
}

function logged(action: string) {
	return db.select().from(table.eventLog).where(eq(table.eventLog.action, action)).all();
}

beforeEach(() => {
	createTestDatabase();
});
afterEach(() => {
	uninstall?.();
	uninstall = null;
});
afterAll(() => stopFakeSmtp());

describe('paging on a significant notice', () => {
	it('never pages for a test or utility notice (VOEvent 2.0 §3.1.2), even when called as significant', async () => {
		expect.hasAssertions();
		uninstall = duty.installDuty({ escalateEveryMs: null });
		const now = new Date();
		const onShift = await person('Role Watcher', ['duty']);
		shift(onShift.id, new Date(now.getTime() - HOUR), new Date(now.getTime() + HOUR), 0);
		for (const role of ['test', 'utility'] as const) {
			const ev = insertEvent({ receivedAt: new Date(now.getTime() - 3_000), role });
			processed(ev.eventId, ev.noticeId, true);
			expect(await duty.pageForNotice(ev.eventId, ev.noticeId)).toEqual([]);
			expect(pages(ev.eventId)).toHaveLength(0);
		}
		// The same roster pages for an observation: the check above could fail.
		const real = insertEvent({ receivedAt: new Date(now.getTime() - 3_000) });
		processed(real.eventId, real.noticeId, true);
		expect(pages(real.eventId)).toHaveLength(1);
		expect(await mailTo(onShift.email)).toHaveLength(1);
	});

	it('e-mails the rank-0 person on shift with the event summary and a link, and records the page once', async () => {
		expect.hasAssertions();
		uninstall = duty.installDuty({ escalateEveryMs: null });
		const now = new Date();
		const first = await person('Rank Zero', ['duty']);
		const second = await person('Rank One', ['coordinator']);
		shift(second.id, new Date(now.getTime() - HOUR), new Date(now.getTime() + HOUR), 1);
		shift(first.id, new Date(now.getTime() - HOUR), new Date(now.getTime() + HOUR), 0);
		const ev = insertEvent({ receivedAt: new Date(now.getTime() - 3_000) });

		processed(ev.eventId, ev.noticeId, true);
		const mails = await mailTo(first.email);
		expect(mails).toHaveLength(1);
		const [mail] = mails;
		// 1 per 100 yr in Hz: 1 / (100 × 3.15576e7 s).
		expect(mail.subject).toBe(`${ev.sourceEventId} initial · FAR 0.01 per yr (1 in 100 yr) · BNS 97% NSBH 2% · 90% 123 deg² · 165 ± 45 Mpc`);
		expect(mail.text).toContain(`${config.publicUrl}/events/${ev.eventId}`);
		expect(mail.text).toContain('Rank Zero,');
		expect(await mailTo(second.email, 200)).toEqual([]);

		const rows = pages(ev.eventId);
		expect(rows).toHaveLength(1);
		expect(rows[0]).toMatchObject({ userId: first.id, level: 0, noticeId: ev.noticeId, acknowledgedAt: null, escalatedAt: null });
		expect(logged('duty.paged').map((r) => r.room).sort()).toEqual(['board', `event:${ev.eventId}`]);

		// The same notice processed again (a restart) pages nobody a second time.
		processed(ev.eventId, ev.noticeId, true);
		await new Promise((r) => setTimeout(r, 150));
		expect(pages(ev.eventId)).toHaveLength(1);
		expect(receivedMail().filter((m) => m.to.includes(first.email))).toHaveLength(1);
	});

	it('pages nobody for a notice that is not significant', async () => {
		expect.hasAssertions();
		uninstall = duty.installDuty({ escalateEveryMs: null });
		const now = new Date();
		const p = await person('Quiet Shift', ['duty']);
		shift(p.id, new Date(now.getTime() - HOUR), new Date(now.getTime() + HOUR), 0);
		const ev = insertEvent({ receivedAt: now });
		processed(ev.eventId, ev.noticeId, false);
		expect(await mailTo(p.email, 300)).toEqual([]);
		expect(pages(ev.eventId)).toEqual([]);
		expect(logged('duty.paged')).toEqual([]);
	});

	it('pages every duty scientist when nobody is on shift, and says so on the board', async () => {
		expect.hasAssertions();
		const t0 = new Date('2026-03-01T12:00:00Z');
		const a = await person('Duty A', ['duty']);
		const b = await person('Duty B', ['duty', 'observer']);
		const coordinator = await person('Not Duty', ['coordinator']);
		// A shift that ended an hour before the notice does not count.
		shift(coordinator.id, new Date(t0.getTime() - 5 * HOUR), new Date(t0.getTime() - HOUR), 0);
		const ev = insertEvent({ receivedAt: t0 });

		const created = await duty.pageForNotice(ev.eventId, ev.noticeId, t0);
		expect(created.map((p) => p.userId).sort()).toEqual([a.id, b.id].sort());
		expect((await mailTo(a.email)).length).toBe(1);
		expect((await mailTo(b.email)).length).toBe(1);
		expect(await mailTo(coordinator.email, 200)).toEqual([]);
		expect((await mailTo(a.email))[0].text).toContain('Nobody is on the duty roster right now');
		const notes = logged('duty.nobody-on-shift');
		expect(notes).toHaveLength(1);
		expect(notes[0].room).toBe('board');
		expect((notes[0].payload.paged as string[]).sort()).toEqual(['Duty A', 'Duty B']);
	});
});

describe('escalation', () => {
	it('moves an unacknowledged page to the next rank after the policy minutes, then stops at the end of the roster', async () => {
		expect.hasAssertions();
		const t0 = new Date('2026-03-01T12:00:00Z');
		db.insert(table.triagePolicy).values({ id: 1, escalateAfterMin: 3 }).run();
		const first = await person('First On', ['duty']);
		const second = await person('Second On', ['coordinator']);
		shift(first.id, new Date(t0.getTime() - HOUR), new Date(t0.getTime() + HOUR), 0);
		shift(second.id, new Date(t0.getTime() - HOUR), new Date(t0.getTime() + HOUR), 1);
		const ev = insertEvent({ receivedAt: t0 });
		await duty.pageForNotice(ev.eventId, ev.noticeId, t0);

		expect(await duty.escalate(new Date(t0.getTime() + 3 * MIN - 1000))).toBe(0);
		expect(pages(ev.eventId)).toHaveLength(1);

		expect(await duty.escalate(new Date(t0.getTime() + 3 * MIN))).toBe(1);
		const after = pages(ev.eventId).sort((x, y) => x.level - y.level);
		expect(after).toHaveLength(2);
		expect(after[0]).toMatchObject({ userId: first.id, level: 0, escalatedAt: new Date(t0.getTime() + 3 * MIN) });
		expect(after[1]).toMatchObject({ userId: second.id, level: 1, escalatedAt: null, noticeId: ev.noticeId });
		const escalatedMail = await mailTo(second.email);
		expect(escalatedMail).toHaveLength(1);
		expect(escalatedMail[0].subject).toMatch(new RegExp(`^ESCALATED · ${ev.sourceEventId} initial`));
		expect(escalatedMail[0].text).toContain('First On did not acknowledge within 3 min');

		// Nobody after rank 1: the page is marked escalated once, with no successor.
		expect(await duty.escalate(new Date(t0.getTime() + 7 * MIN))).toBe(1);
		expect(pages(ev.eventId)).toHaveLength(2);
		expect(logged('duty.escalation-exhausted').filter((r) => r.room === 'board')).toHaveLength(1);
		expect(await duty.escalate(new Date(t0.getTime() + 20 * MIN))).toBe(0);
		expect(logged('duty.escalation-exhausted').filter((r) => r.room === 'board')).toHaveLength(1);
	});

	it('waits the default 10 minutes when the policy row is missing, and never escalates a retracted event', async () => {
		expect.hasAssertions();
		const t0 = new Date('2026-03-01T12:00:00Z');
		const first = await person('Default First', ['duty']);
		const second = await person('Default Second', ['duty']);
		shift(first.id, new Date(t0.getTime() - HOUR), new Date(t0.getTime() + HOUR), 0);
		shift(second.id, new Date(t0.getTime() - HOUR), new Date(t0.getTime() + HOUR), 1);
		expect(duty.escalateAfterMin()).toBe(10);
		const kept = insertEvent({ receivedAt: t0 });
		const retracted = insertEvent({ receivedAt: t0 });
		await duty.pageForNotice(kept.eventId, kept.noticeId, t0);
		await duty.pageForNotice(retracted.eventId, retracted.noticeId, t0);
		db.update(table.gwEvent).set({ state: 'retracted', retractedAt: t0 }).where(eq(table.gwEvent.id, retracted.eventId)).run();

		expect(await duty.escalate(new Date(t0.getTime() + 9 * MIN))).toBe(0);
		expect(await duty.escalate(new Date(t0.getTime() + 10 * MIN))).toBe(1);
		expect(pages(kept.eventId).map((p) => p.userId).sort()).toEqual([first.id, second.id].sort());
		expect(pages(retracted.eventId).map((p) => p.userId)).toEqual([first.id]);
	});
});

describe('acknowledgement', () => {
	it('closes the open pages with the latency from the inbox and logs it in both rooms', async () => {
		expect.hasAssertions();
		const t0 = new Date('2026-03-01T12:00:00Z');
		const first = await person('Acker', ['duty']);
		const second = await person('Backup', ['coordinator']);
		shift(first.id, new Date(t0.getTime() - HOUR), new Date(t0.getTime() + HOUR), 0);
		shift(second.id, new Date(t0.getTime() - HOUR), new Date(t0.getTime() + HOUR), 1);
		const ev = insertEvent({ receivedAt: t0 });
		await duty.pageForNotice(ev.eventId, ev.noticeId, new Date(t0.getTime() + 4_000));
		await duty.escalate(new Date(t0.getTime() + 10 * MIN + 4_000));

		// The escalated-to person acknowledges 11 min 35 s after the notice reached the inbox.
		const at = new Date(t0.getTime() + 11 * MIN + 35_000);
		const result = duty.acknowledge({ id: second.id, name: second.name }, ev.eventId, at);
		expect(result).toEqual({ pages: 2, latencyS: 695 });
		for (const p of pages(ev.eventId)) expect(p).toMatchObject({ acknowledgedAt: at, acknowledgedBy: second.id, latencyS: 695 });
		const logs = logged('event.acknowledged');
		expect(logs.map((l) => l.room).sort()).toEqual(['board', `event:${ev.eventId}`]);
		expect(logs[0].payload).toEqual({ eventId: ev.eventId, by: 'Backup', latencyS: 695, pages: 2 });
		expect(logs[0].actorUserId).toBe(second.id);

		expect(() => duty.acknowledge({ id: first.id, name: first.name }, ev.eventId, at)).toThrow(/nothing to acknowledge/);
		// Acknowledged pages do not escalate.
		expect(await duty.escalate(new Date(t0.getTime() + HOUR))).toBe(0);

		const state = duty.ackState(duty.pagesFor([ev.eventId]).get(ev.eventId)!);
		expect(state).toMatchObject({ state: 'acknowledged', acknowledgedBy: 'Backup', latencyS: 695 });
	});

	it('measures from the notice row when the notice has no inbox entry', async () => {
		expect.hasAssertions();
		const t0 = new Date('2026-03-01T12:00:00Z');
		const p = await person('Solo', ['duty']);
		shift(p.id, new Date(t0.getTime() - HOUR), new Date(t0.getTime() + HOUR), 0);
		const ev = insertEvent({ receivedAt: t0 });
		db.update(table.notice).set({ inboxId: null }).where(eq(table.notice.id, ev.noticeId)).run();
		await duty.pageForNotice(ev.eventId, ev.noticeId, t0);
		// insertEvent puts the notice row 2 s after the inbox time.
		expect(duty.acknowledge({ id: p.id, name: p.name }, ev.eventId, new Date(t0.getTime() + 62_000)).latencyS).toBe(60);
	});
});

describe('roster', () => {
	it('refuses a shift that ends before it starts or a person who cannot acknowledge', async () => {
		expect.hasAssertions();
		const t0 = new Date('2026-03-01T12:00:00Z');
		const viewer = await person('Only Viewer', ['viewer']);
		const dutyPerson = await person('On Duty', ['duty']);
		expect(() => shift(dutyPerson.id, t0, t0, 0)).toThrow(expect.objectContaining({ field: 'endsAt' }));
		expect(() => shift(viewer.id, t0, new Date(t0.getTime() + HOUR), 0)).toThrow(expect.objectContaining({ field: 'userId' }));
		const id = shift(dutyPerson.id, t0, new Date(t0.getTime() + HOUR), 0);
		expect(duty.onShift(new Date(t0.getTime() + MIN)).map((s) => s.shiftId)).toEqual([id]);
		expect(duty.onShift(new Date(t0.getTime() + HOUR))).toEqual([]);
		expect(duty.rosterablePeople().map((p) => p.name)).toEqual(['On Duty']);
	});
});

describe('retraction', () => {
	it('tells everyone who was paged for the event to stand down, once each', async () => {
		uninstall = duty.installDuty({ escalateEveryMs: null });
		const now = new Date();
		const onShift = await person('Paged Person', ['duty']);
		const bystander = await person('Not Paged', ['duty']);
		shift(onShift.id, new Date(now.getTime() - HOUR), new Date(now.getTime() + HOUR), 0);
		const ev = insertEvent({ receivedAt: new Date(now.getTime() - 3_000) });
		processed(ev.eventId, ev.noticeId, true);
		expect(await mailTo(onShift.email)).toHaveLength(1);

		record(SYSTEM, 'event.retracted', 'board', { eventId: ev.eventId, noticeId: ev.noticeId, reason: null });
		record(SYSTEM, 'event.retracted', `event:${ev.eventId}`, { eventId: ev.eventId, noticeId: ev.noticeId, reason: null });
		const until = Date.now() + 3000;
		let mails: ReceivedMail[] = [];
		while (Date.now() < until && mails.length < 2) {
			mails = receivedMail().filter((m) => m.to.includes(onShift.email));
			await new Promise((r) => setTimeout(r, 20));
		}
		const standDown = mails.filter((m) => m.subject.startsWith('RETRACTED'));
		expect(standDown).toHaveLength(1);
		expect(standDown[0].subject).toBe(`RETRACTED ${ev.sourceEventId} · stand down`);
		expect(standDown[0].text).toContain('Stop follow-up observations');
		expect(await mailTo(bystander.email, 200)).toEqual([]);
	});
});
