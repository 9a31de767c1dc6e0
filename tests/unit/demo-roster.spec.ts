import { describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../../src/lib/server/platform/testing/database';
import * as table from '../../src/lib/server/platform/db/schema';
import { onShift } from '../../src/lib/server/duty/paging';
import { seedDemo, seedDemoRoster, seedMissingDemoPeople, DEMO_ROSTER_HALF_SPAN_MS } from '../../seeds/demo';
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
