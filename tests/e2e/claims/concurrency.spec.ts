import { test, expect } from '@playwright/test';
import { createHash, randomBytes } from 'node:crypto';
import { readFileSync } from 'node:fs';
import Database from 'better-sqlite3';
import { io, type Socket } from 'socket.io-client';
import { BASE_URL } from '../../../playwright.config';
import { sunSeparationDeg } from '../../../src/lib/targeting/sun-moon';

/**
 * The app's database file (WAL mode): the test creates people and tokens in it directly, as an
 * administrator's tools would, and reads the claims back to check what the server stored.
 */
const DB_FILE = 'tests/e2e/.artifacts/e2e.sqlite';
const SOURCE_ID = 'SX30077001';

const sha256 = (s: string) => createHash('sha256').update(s).digest('hex');

function openDb() {
	const sqlite = new Database(DB_FILE);
	sqlite.pragma('busy_timeout = 5000');
	return sqlite;
}

/** A bearer token row for a person or a telescope; returns the secret. */
function token(sqlite: Database.Database, owner: { userId?: string; telescopeId?: string }, revoked = false): string {
	const secret = 'stl_' + randomBytes(18).toString('hex');
	sqlite
		.prepare('INSERT INTO api_token (id, name, token_hash, prefix, user_id, telescope_id, revoked_at) VALUES (?, ?, ?, ?, ?, ?, ?)')
		.run(randomBytes(8).toString('hex'), 'e2e', sha256(secret), secret.slice(0, 10), owner.userId ?? null, owner.telescopeId ?? null, revoked ? Date.now() : null);
	return secret;
}

function person(sqlite: Database.Database, i: number, roles: string[], teamId: string | null): string {
	const id = `e2e-claimer-${i}-${randomBytes(3).toString('hex')}`;
	sqlite.prepare('INSERT INTO user (id, email, name, password_hash) VALUES (?, ?, ?, ?)').run(id, `${id}@claims.e2e.test`, `Claimer ${i} (test)`, 'not-a-password-hash');
	for (const r of roles) sqlite.prepare('INSERT INTO user_role (user_id, role) VALUES (?, ?)').run(id, r);
	if (teamId) sqlite.prepare('INSERT INTO team_member (team_id, user_id) VALUES (?, ?)').run(teamId, id);
	return id;
}

/** A notice of our own whose event time is an hour ago (so that reports "now" are plausible). */
function noticeXml(): string {
	const eventTime = new Date(Date.now() - 3600_000).toISOString();
	return readFileSync('tests/fixtures/notices/bns-initial.xml', 'utf8')
		.replaceAll('SX30041207', SOURCE_ID)
		.replace(/<ISOTime>\s*[^<]+\s*<\/ISOTime>/, `<ISOTime>${eventTime}</ISOTime>`);
}

test('100 simultaneous claims: one 201, 99 × 409, one row, one live message; a robot token reports, a revoked one is refused', async ({ request }) => {
	test.setTimeout(90_000);
	const sqlite = openDb();
	try {
		const admin = sqlite.prepare("SELECT id FROM user WHERE email = 'admin@strainline.demo'").get() as { id: string };
		const adminToken = token(sqlite, { userId: admin.id });
		const posted = await request.post('/api/v1/notices', { headers: { authorization: `Bearer ${adminToken}`, 'content-type': 'application/xml' }, data: noticeXml() });
		expect([200, 201]).toContain(posted.status());
		const { eventId } = (await posted.json()) as { eventId: string };
		expect(eventId).toBeTruthy();

		// Two demo telescopes of different teams; the target is a catalogue galaxy.
		const scopes = sqlite.prepare('SELECT id, team_id AS teamId, name, filters, fov_width_deg AS fov FROM telescope GROUP BY team_id ORDER BY name LIMIT 2').all() as {
			id: string;
			teamId: string;
			name: string;
			filters: string;
		}[];
		expect(scopes).toHaveLength(2);
		const ranked = await request.get(`/api/v1/events/${eventId}/galaxies?limit=50`, { headers: { authorization: `Bearer ${adminToken}` } });
		const listed = ranked.ok() ? ((await ranked.json()) as { galaxies: { galaxyId: number }[] }).galaxies : [];
		// Ranked galaxies first (when the event has a map), then any catalogue galaxy.
		const pool = [
			...listed.map((g) => sqlite.prepare('SELECT id, ra_deg AS raDeg, dec_deg AS decDeg FROM galaxy WHERE id = ?').get(g.galaxyId)),
			...sqlite.prepare('SELECT id, ra_deg AS raDeg, dec_deg AS decDeg FROM galaxy ORDER BY id LIMIT 500').all()
		] as { id: number; raDeg: number; decDeg: number }[];
		// Far from the Sun today: claims inside a telescope's Sun limit are refused (and are not what this test is about).
		const galaxy = pool.find((g) => sunSeparationDeg(g, new Date()) >= 60)!;
		expect(galaxy).toBeTruthy();

		const claimers = Array.from({ length: 100 }, (_, i) => {
			const scope = scopes[i % 2];
			return { telescopeId: scope.id, secret: token(sqlite, { userId: person(sqlite, i, ['observer'], scope.teamId) }) };
		});

		// One live client in the event's room, counting claim messages.
		const watcherToken = token(sqlite, { userId: person(sqlite, 1000, ['viewer'], null) });
		const socket: Socket = io(`${BASE_URL}/live`, { path: '/socket.io', auth: { token: watcherToken }, transports: ['websocket'] });
		const claimed: unknown[] = [];
		socket.on('live', (m: { type: string }) => {
			if (m.type === 'claim.claimed') claimed.push(m);
		});
		const joined = await new Promise<{ rooms: string[] }>((resolve, reject) => {
			socket.on('connect_error', reject);
			socket.on('connect', () => socket.emit('subscribe', { rooms: [`event:${eventId}`] }, resolve));
		});
		expect(joined.rooms).toContain(`event:${eventId}`);

		const answers = await Promise.all(
			claimers.map((c) =>
				request.post(`/api/v1/events/${eventId}/claims`, {
					headers: { authorization: `Bearer ${c.secret}` },
					data: { targetKind: 'galaxy', targetId: String(galaxy.id), telescopeId: c.telescopeId }
				})
			)
		);
		const statuses = answers.map((a) => a.status());
		expect(statuses.filter((s) => s === 201)).toHaveLength(1);
		expect(statuses.filter((s) => s === 409)).toHaveLength(99);

		const rows = sqlite.prepare('SELECT id, team_id AS teamId, telescope_id AS telescopeId, state FROM claim WHERE event_id = ?').all(eventId) as {
			id: string;
			teamId: string;
			telescopeId: string;
			state: string;
		}[];
		expect(rows).toHaveLength(1);
		expect(rows[0].state).toBe('claimed');
		const winner = scopes.find((s) => s.id === rows[0].telescopeId)!;
		const teamName = (sqlite.prepare('SELECT name FROM team WHERE id = ?').get(winner.teamId) as { name: string }).name;
		const loser = await answers[statuses.indexOf(409)].json();
		expect(loser.error.code).toBe('taken');
		expect(loser.error.message).toContain(`Already taken by ${teamName} (${winner.name})`);

		// Give stragglers a moment: a second broadcast would arrive well within this.
		await new Promise((r) => setTimeout(r, 1000));
		expect(claimed).toHaveLength(1);
		socket.close();

		// The winning telescope, robotic, reports a pointing at the galaxy with its own token.
		const robotSecret = token(sqlite, { telescopeId: winner.id });
		const filter = (JSON.parse(winner.filters) as string[])[0];
		const pointing = { eventId, observedAt: new Date(Date.now() - 60_000).toISOString(), raDeg: galaxy.raDeg, decDeg: galaxy.decDeg, filter, exposureS: 120, limitingMag: 20.5 };
		const reported = await request.post('/api/v1/observations', { headers: { authorization: `Bearer ${robotSecret}` }, data: pointing });
		expect(reported.status()).toBe(201);
		expect((await reported.json()).completedClaimIds).toEqual([rows[0].id]);
		expect((sqlite.prepare('SELECT state FROM claim WHERE id = ?').get(rows[0].id) as { state: string }).state).toBe('done');

		// Bad input: 422 naming the fields.
		const bad = await request.post('/api/v1/observations', {
			headers: { authorization: `Bearer ${robotSecret}` },
			data: { ...pointing, raDeg: 400, exposureS: 0 }
		});
		expect(bad.status()).toBe(422);
		const badBody = await bad.json();
		// Named as the report form labels them, not by the JSON keys.
		expect(badBody.error.message).toContain('RA (deg, J2000)');
		expect(badBody.error.message).toContain('Exposure (s)');
		expect(badBody.error.details).toMatchObject({ raDeg: expect.any(String), exposureS: expect.any(String) });

		// A CSV upload by the same token: all rows or none.
		const csvUrl = `/api/v1/observations?eventId=${encodeURIComponent(eventId)}`;
		const at = new Date(Date.now() - 30_000).toISOString();
		const csvHeaders = { authorization: `Bearer ${robotSecret}`, 'content-type': 'text/csv' };
		const header = 'observed_at,ra_deg,dec_deg,filter,exposure_s,limiting_mag';
		const badCsv = await request.post(csvUrl, { headers: csvHeaders, data: `${header}\n${at},10,10,${filter},60,20\n${at},10,95,${filter},60,20\n` });
		expect(badCsv.status()).toBe(422);
		expect((await badCsv.json()).error.details).toEqual([{ line: 3, message: expect.stringContaining('Dec (deg, J2000)') }]);
		const goodCsv = await request.post(csvUrl, { headers: csvHeaders, data: `${header}\n${at},10,10,${filter},60,20\n${at},11,10,${filter},60,20\n` });
		expect(goodCsv.status()).toBe(201);
		expect((await goodCsv.json()).results).toHaveLength(2);

		// A revoked token is refused.
		const revoked = token(sqlite, { telescopeId: winner.id }, true);
		const refused = await request.post('/api/v1/observations', { headers: { authorization: `Bearer ${revoked}` }, data: pointing });
		expect(refused.status()).toBe(401);
		expect((sqlite.prepare('SELECT count(*) AS n FROM observation WHERE event_id = ?').get(eventId) as { n: number }).n).toBe(3);
	} finally {
		sqlite.close();
	}
});
