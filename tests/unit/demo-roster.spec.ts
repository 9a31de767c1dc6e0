import { describe, expect, it } from 'vitest';
import { createTestDatabase } from '../../src/lib/server/platform/testing/database';
import * as table from '../../src/lib/server/platform/db/schema';
import { onShift } from '../../src/lib/server/duty/paging';
import { seedDemo, seedDemoRoster, DEMO_ROSTER_HALF_SPAN_MS } from '../../seeds/demo';

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
