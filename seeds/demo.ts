/**
 * Seed the invented demo collaboration (idempotent: does nothing when it is already there).
 * Run: `npm run seed` (uses DATABASE_URL or data/strainline.sqlite).
 */
import { eq } from 'drizzle-orm';
import { pathToFileURL } from 'node:url';
import { openDatabase, type DB } from '../src/lib/server/db';
import * as table from '../src/lib/server/db/schema';
import { createUser } from '../src/lib/server/people';
import { createTeam } from '../src/lib/server/teams';
import { createTelescope } from '../src/lib/server/telescopes';
import { SYSTEM } from '../src/lib/server/realtime';
import { DEMO_PEOPLE, DEMO_TEAMS, DEMO_TELESCOPES } from './scenario';

export async function seedDemo(database: DB): Promise<{ created: boolean }> {
	const already = database.select({ id: table.user.id }).from(table.user).where(eq(table.user.email, DEMO_PEOPLE[0].email)).get();
	if (already) return { created: false };
	const actor = { ...SYSTEM, label: 'demo seed' };
	const teamIds = new Map<string, string>();
	for (const t of DEMO_TEAMS) teamIds.set(t.key, createTeam(actor, { name: t.name, region: t.region, description: t.description, isDemo: true }));
	for (const { team, ...scope } of DEMO_TELESCOPES) createTelescope(actor, { ...scope, teamId: teamIds.get(team)!, isDemo: true });
	for (const p of DEMO_PEOPLE) {
		await createUser({ email: p.email, name: p.name, password: p.password, roles: p.roles, teamIds: p.teams.map((k) => teamIds.get(k)!), isDemo: true });
	}
	return { created: true };
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
	const database = openDatabase();
	const { created } = await seedDemo(database);
	console.log(created ? 'Demo collaboration seeded (invented data).' : 'Demo collaboration already present.');
}
