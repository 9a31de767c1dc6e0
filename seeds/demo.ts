/**
 * Seed the invented demo collaboration (idempotent: does nothing when it is already there).
 * Run: `npm run seed` (uses DATABASE_URL or data/strainline.sqlite).
 */
import { and, eq, gt, inArray, lte } from 'drizzle-orm';
import { pathToFileURL } from 'node:url';
import { openDatabase, type DB } from '../src/lib/server/platform/db';
import * as table from '../src/lib/server/platform/db/schema';
import { createUser } from '../src/lib/server/people/people';
import { createTeam } from '../src/lib/server/people/teams';
import { createTelescope } from '../src/lib/server/people/telescopes';
import { SYSTEM } from '../src/lib/server/platform/realtime';
import { randomId } from '../src/lib/server/people/auth';
import { importCatalog } from '../src/lib/server/targeting/catalogs';
import { WEBHOOK_KINDS } from '../src/lib/webhooks';
import { channelProblems, toE164 } from '../src/lib/page-channels';
import { DEMO_PEOPLE, DEMO_TEAMS, DEMO_TELESCOPES } from './scenario';
import { generateSyntheticCatalog, syntheticCatalogCsv } from './synthetic-catalog';

const DAY_MS = 24 * 3600_000;
/** The demo roster reaches this far either side of the moment it is seeded. */
export const DEMO_ROSTER_HALF_SPAN_MS = 4 * DAY_MS;

/**
 * Put the demo duty scientist on shift (rank 0) with the demo coordinator as back-up (rank 1),
 * from four days before `now` to four days after, so a demo started any time finds someone on
 * duty. Does nothing while either of them already has a shift covering `now`.
 */
export function seedDemoRoster(database: DB, now = new Date()): { created: boolean } {
	const emails = ['duty@strainline.demo', 'coordinator@strainline.demo'];
	const people = database.select({ id: table.user.id, email: table.user.email }).from(table.user).where(inArray(table.user.email, emails)).all();
	if (people.length === 0) return { created: false };
	const covering = database
		.select({ id: table.dutyShift.id })
		.from(table.dutyShift)
		.where(and(inArray(table.dutyShift.userId, people.map((p) => p.id)), lte(table.dutyShift.startsAt, now), gt(table.dutyShift.endsAt, now)))
		.get();
	if (covering) return { created: false };
	const startsAt = new Date(now.getTime() - DEMO_ROSTER_HALF_SPAN_MS);
	const endsAt = new Date(now.getTime() + DEMO_ROSTER_HALF_SPAN_MS);
	for (const p of people) {
		const rank = emails.indexOf(p.email);
		database
			.insert(table.dutyShift)
			.values({
				id: randomId(),
				userId: p.id,
				startsAt,
				endsAt,
				rank,
				handoverNote: rank === 0 ? 'Demo shift: quiet so far. The alert listener is connected to the local fake broker.' : ''
			})
			.run();
	}
	return { created: true };
}

/** The demo's galaxy catalogue: 20,000 invented galaxies, always the same (seed 23). */
export const DEMO_CATALOG = { name: 'Synthetic demo galaxies (invented)', rows: 20_000, maxDistanceMpc: 400, seed: 23 } as const;

/**
 * Import the synthetic demo catalogue when there is no catalogue at all, through the same
 * streamed import as an upload. Labelled synthetic everywhere it is shown.
 */
export async function seedDemoCatalog(database: DB): Promise<{ created: boolean }> {
	if (database.select({ id: table.catalog.id }).from(table.catalog).limit(1).get()) return { created: false };
	const options = { rows: DEMO_CATALOG.rows, maxDistanceMpc: DEMO_CATALOG.maxDistanceMpc, seed: DEMO_CATALOG.seed };
	const out = await importCatalog(
		{ ...SYSTEM, label: 'demo seed' },
		{
			name: DEMO_CATALOG.name,
			sourceNote: `seeds/synthetic-catalog.ts --rows ${options.rows} --max-distance ${options.maxDistanceMpc} --seed ${options.seed}: uniform in volume, Schechter B luminosities`,
			synthetic: true
		},
		syntheticCatalogCsv(generateSyntheticCatalog(options), options),
		{ progressEveryMs: null }
	);
	if (out.state !== 'ready') throw new Error(`demo catalogue import failed: ${out.error}`);
	return { created: true };
}

/**
 * Demo people added to the scenario after a demo database was made (the second spectroscopist),
 * so an older demo database gains them too; their teams are found by name. Returns the e-mails added.
 */
export async function seedMissingDemoPeople(database: DB): Promise<string[]> {
	const known = new Set(database.select({ email: table.user.email }).from(table.user).all().map((u) => u.email));
	const teams = new Map(database.select({ id: table.team.id, name: table.team.name }).from(table.team).all().map((t) => [t.name, t.id]));
	const added: string[] = [];
	for (const p of DEMO_PEOPLE) {
		if (known.has(p.email)) continue;
		const teamIds = p.teams.map((k) => teams.get(DEMO_TEAMS.find((t) => t.key === k)?.name ?? '')).filter((id): id is string => Boolean(id));
		await createUser({ email: p.email, name: p.name, password: p.password, roles: p.roles, teamIds, isDemo: true });
		added.push(p.email);
	}
	return added;
}

/**
 * Give the demo people of the scenario who have a phone their number, as verified, with their
 * channels, when they have no phone settings yet (so an older demo database gains them, and a
 * number changed on the account page is kept). Returns the e-mails given a phone.
 */
export function seedDemoPhones(database: DB, now = new Date()): string[] {
	const added: string[] = [];
	for (const p of DEMO_PEOPLE) {
		if (!p.phone) continue;
		const number = toE164(p.phone.number);
		const problems = channelProblems(p.phone.channels, { verifiedPhone: true, dutyScientist: p.roles.includes('duty') });
		if (!number || Object.keys(problems).length) throw new Error(`demo phone of ${p.email} is not valid: ${number ? Object.values(problems).join(' ') : p.phone.number}`);
		const user = database.select({ id: table.user.id }).from(table.user).where(eq(table.user.email, p.email)).get();
		if (!user) continue;
		const done = database
			.insert(table.phoneContact)
			.values({ userId: user.id, number, verifiedAt: now, channels: p.phone.channels, updatedAt: now })
			.onConflictDoNothing({ target: table.phoneContact.userId })
			.run();
		if (done.changes) added.push(p.email);
	}
	return added;
}

/** The demo's chat room: a webhook to the app's local fake receiver, so that its messages show on the webhook catcher. */
export const DEMO_WEBHOOK = { id: 'demo-room', name: 'Demo follow-up room (local fake receiver)', path: '/hook/demo-room' } as const;

/**
 * Add the demo room's webhook when there is no webhook at all, addressed to the fake receiver on
 * `port` as configured. The receiver may end up on another port (0 asks for any free one; a taken
 * port falls back to a free one): the app re-points the address once it is listening
 * (`repointFakeReceiverWebhooks`).
 */
export function seedDemoWebhook(database: DB, port: number): { created: boolean } {
	if (database.select({ id: table.chatWebhook.id }).from(table.chatWebhook).limit(1).get()) return { created: false };
	database
		.insert(table.chatWebhook)
		.values({ id: DEMO_WEBHOOK.id, name: DEMO_WEBHOOK.name, url: `http://127.0.0.1:${port}${DEMO_WEBHOOK.path}`, kinds: [...WEBHOOK_KINDS] })
		.run();
	return { created: true };
}

export async function seedDemo(database: DB): Promise<{ created: boolean }> {
	const already = database.select({ id: table.user.id }).from(table.user).where(eq(table.user.email, DEMO_PEOPLE[0].email)).get();
	if (already) {
		await seedMissingDemoPeople(database);
		seedDemoPhones(database);
		seedDemoRoster(database);
		await seedDemoCatalog(database);
		return { created: false };
	}
	const actor = { ...SYSTEM, label: 'demo seed' };
	const teamIds = new Map<string, string>();
	for (const t of DEMO_TEAMS) teamIds.set(t.key, createTeam(actor, { name: t.name, region: t.region, description: t.description, isDemo: true }));
	for (const { team, ...scope } of DEMO_TELESCOPES) createTelescope(actor, { ...scope, teamId: teamIds.get(team)!, isDemo: true });
	for (const p of DEMO_PEOPLE) {
		await createUser({ email: p.email, name: p.name, password: p.password, roles: p.roles, teamIds: p.teams.map((k) => teamIds.get(k)!), isDemo: true });
	}
	seedDemoPhones(database);
	seedDemoRoster(database);
	await seedDemoCatalog(database);
	return { created: true };
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
	const database = openDatabase();
	const { created } = await seedDemo(database);
	console.log(created ? 'Demo collaboration seeded (invented data).' : 'Demo collaboration already present.');
}
