import { afterAll, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../../src/lib/server/platform/testing/database';
import * as table from '../../src/lib/server/platform/db/schema';
import { onShift, pageForNotice, escalate, DEFAULT_ESCALATE_AFTER_MIN } from '../../src/lib/server/duty/paging';
import { phoneSettingsOf, reachFor } from '../../src/lib/server/people/phone';
import { phoneRecords, stopFakePhone } from '../../src/lib/server/platform/fake-phone';
import { stopFakeSmtp } from '../../src/lib/server/platform/fake-smtp';
import { seedDemo, seedDemoPhones, seedDemoRoster, seedMissingDemoPeople, DEMO_ROSTER_HALF_SPAN_MS } from '../../seeds/demo';
import { DEMO_PEOPLE } from '../../seeds/scenario';

describe('demo roster', () => {
	it('puts the duty scientist first and the coordinator second on shift, and seeding again adds nothing', async () => {
		expect.hasAssertions();
		const database = createTestDatabase();
		await seedDemo(database);
		const now = new Date();
		expect(onShift(now).map((s) => [s.email, s.rank])).toEqual([
			['duty@strainline.demo', 0],
			['coordinator@strainline.demo', 1]
		]);
		expect(onShift(new Date(now.getTime() + DEMO_ROSTER_HALF_SPAN_MS - 60_000))).toHaveLength(2);
		await seedDemo(database);
		expect(database.select().from(table.dutyShift).all()).toHaveLength(2);

		// Once the seeded shifts have run out, seeding again covers the new moment.
		const later = new Date(now.getTime() + DEMO_ROSTER_HALF_SPAN_MS + 60_000);
		expect(onShift(later)).toEqual([]);
		expect(seedDemoRoster(database, later)).toEqual({ created: true });
		expect(onShift(later).map((s) => s.rank)).toEqual([0, 1]);
		expect(seedDemoRoster(database, later)).toEqual({ created: false });
	});
});

describe('demo people added later', () => {
	it('an older demo database gains the people added to the scenario since, with their teams; seeding again adds nobody', async () => {
		expect.hasAssertions();
		const database = createTestDatabase();
		await seedDemo(database);
		// As a demo database made before the second spectroscopist and the Karoo observer existed.
		const gone = ['spectro2@strainline.demo', 'observer2@strainline.demo'];
		for (const email of gone) database.delete(table.user).where(eq(table.user.email, email)).run();
		expect(await seedMissingDemoPeople(database)).toEqual(['observer2@strainline.demo', 'spectro2@strainline.demo']);
		const spectro2 = database.select().from(table.user).where(eq(table.user.email, 'spectro2@strainline.demo')).get()!;
		expect(database.select({ role: table.userRole.role }).from(table.userRole).where(eq(table.userRole.userId, spectro2.id)).all()).toEqual([{ role: 'spectroscopist' }]);
		const observer2 = database.select().from(table.user).where(eq(table.user.email, 'observer2@strainline.demo')).get()!;
		const teamNames = database
			.select({ name: table.team.name })
			.from(table.teamMember)
			.innerJoin(table.team, eq(table.team.id, table.teamMember.teamId))
			.where(eq(table.teamMember.userId, observer2.id))
			.all();
		expect(teamNames).toEqual([{ name: 'Karoo Wide Field' }]);
		expect(await seedMissingDemoPeople(database)).toEqual([]);
		expect(database.select().from(table.user).all()).toHaveLength(DEMO_PEOPLE.length);
	});
});

describe('demo phones', () => {
	afterAll(async () => {
		await stopFakePhone();
		await stopFakeSmtp();
	});
	const idOf = (database: ReturnType<typeof createTestDatabase>, email: string) => database.select().from(table.user).where(eq(table.user.email, email)).get()!.id;

	it('the duty scientist and the back-up coordinator have invented, verified numbers; nobody else has one; seeding again adds nothing', async () => {
		expect.hasAssertions();
		const database = createTestDatabase();
		await seedDemo(database);
		const duty = idOf(database, 'duty@strainline.demo');
		const coordinator = idOf(database, 'coordinator@strainline.demo');
		expect(phoneSettingsOf(duty)).toMatchObject({ number: '+12025550143', pendingNumber: null });
		expect(phoneSettingsOf(duty).verifiedAt).toBeInstanceOf(Date);
		expect(phoneSettingsOf(coordinator).number).toBe('+12025550178');
		expect(reachFor(duty, 'duty.page').channels).toEqual(['email', 'sms', 'voice']);
		expect(reachFor(coordinator, 'duty.page').channels).toEqual(['email', 'sms']);
		// Fictional numbers only: 555-0100 to 555-0199.
		for (const row of database.select().from(table.phoneContact).all()) expect(row.number).toMatch(/^\+1\d{3}55501\d{2}$/);
		expect(database.select().from(table.phoneContact).all()).toHaveLength(DEMO_PEOPLE.filter((p) => p.phone).length);
		expect(DEMO_PEOPLE.filter((p) => p.phone).map((p) => p.email)).toEqual(['coordinator@strainline.demo', 'duty@strainline.demo']);
		await seedDemo(database);
		expect(database.select().from(table.phoneContact).all()).toHaveLength(2);
	});

	it('an older demo database gains the phones, and a number changed since is kept', async () => {
		expect.hasAssertions();
		const database = createTestDatabase();
		await seedDemo(database);
		const duty = idOf(database, 'duty@strainline.demo');
		database.delete(table.phoneContact).run();
		database.insert(table.phoneContact).values({ userId: duty, number: '+34611000611', verifiedAt: new Date(), channels: { 'duty.page': ['email', 'voice'] }, updatedAt: new Date() }).run();
		expect(seedDemoPhones(database)).toEqual(['coordinator@strainline.demo']);
		expect(phoneSettingsOf(duty).number).toBe('+34611000611');
		expect(seedDemoPhones(database)).toEqual([]);
	});

	it('a significant notice pages the demo duty scientist by e-mail, text and call through the fake messaging service, and escalates to the coordinator by text', async () => {
		expect.hasAssertions();
		const database = createTestDatabase();
		await seedDemo(database);
		const t0 = new Date();
		database.insert(table.gwEvent).values({ id: 'demo-ev', sourceEventId: 'S-demo-phone', role: 'observation', state: 'active', eventTime: t0 }).run();
		const inbox = database.insert(table.noticeInbox).values({ ivorn: 'ivo://demo.invalid/phone#1', rawXml: '<voe/>', via: 'vtp', receivedAt: t0 }).returning().get();
		database
			.insert(table.notice)
			.values({
				id: 'demo-no',
				eventId: 'demo-ev',
				inboxId: inbox.id,
				ivorn: 'ivo://demo.invalid/phone#1',
				kind: 'initial',
				role: 'observation',
				authoredAt: t0,
				farHz: 1e-10,
				classification: { BNS: 0.9, NSBH: 0.05, BBH: 0, Terrestrial: 0.05 },
				citations: [],
				parsed: {},
				createdAt: t0
			})
			.run();
		await pageForNotice('demo-ev', 'demo-no', t0);
		const toDuty = phoneRecords().filter((r) => r.direction === 'outbound' && r.to === '+12025550143');
		expect(toDuty.filter((r) => r.type === 'sms').map((r) => r.text)).toEqual([expect.stringContaining('S-demo-phone')]);
		// The call spells the event's name out, letter by letter.
		expect(toDuty.filter((r) => r.type === 'voice').map((r) => r.text)).toEqual([expect.stringContaining('S-demo-phone'.split('').join(' '))]);
		const sent = database.select().from(table.pageMessage).where(eq(table.pageMessage.eventId, 'demo-ev')).all();
		expect(sent.map((m) => [m.channel, m.status]).sort()).toEqual([
			['email', 'sent'],
			['sms', 'sent'],
			['voice', 'sent']
		]);
		expect(await escalate(new Date(t0.getTime() + DEFAULT_ESCALATE_AFTER_MIN * 60_000 + 1000))).toBe(1);
		const toCoordinator = phoneRecords().filter((r) => r.direction === 'outbound' && r.to === '+12025550178' && r.text.includes('S-demo-phone'));
		expect(toCoordinator.map((r) => r.type)).toEqual(['sms']);
	});
});
