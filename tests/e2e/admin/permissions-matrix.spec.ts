import { test, expect, request as newRequest, type APIRequestContext } from '@playwright/test';
import { readFileSync } from 'node:fs';
import Database from 'better-sqlite3';
import { DEMO_PEOPLE } from '../../../seeds/scenario';
import { ROLES_LIST, type RoleName } from '../../../src/lib/roles';
import { BASE_URL } from '../../../playwright.config';

/**
 * Every role against every mutating form action. An empty form is sent: a role that may act
 * gets past the permission check and is stopped by validation (400); a role that may not gets 403;
 * nobody signed in is sent to sign in (303 to /sign-in) without the action running. `ok` marks actions that need no input (they succeed: 200).
 * A row with `form` sends that form instead: it passes validation, and a role allowed to act is
 * stopped later (400) without anything changing. `allowedStatus` replaces 400 where an allowed role is refused otherwise.
 * A `public` row needs no sign-in by design: everyone, signed out included, gets the same answer.
 */
const MATRIX: { path: string; allowed: RoleName[] | 'all'; ok?: boolean; allowedStatus?: number; form?: Record<string, string>; public?: boolean }[] = [
	{ path: '/admin?/invite', allowed: ['admin', 'coordinator'] },
	// Only an administrator may make an administrator: a coordinator is refused before anything is sent;
	// the admin gets as far as "this address already has an account".
	{ path: '/admin?/invite', allowed: ['admin'], form: { email: 'viewer@strainline.demo', roles: 'admin' } },
	{ path: '/admin?/withdraw', allowed: ['admin', 'coordinator'] },
	{ path: '/admin?/roles', allowed: ['admin'] },
	{ path: '/admin?/disable', allowed: ['admin'] },
	{ path: '/admin?/enable', allowed: ['admin'] },
	{ path: '/admin/tokens?/issue', allowed: ['admin'] },
	{ path: '/admin/tokens?/revoke', allowed: ['admin'] },
	{ path: '/teams?/create', allowed: ['admin', 'coordinator'] },
	{ path: '/teams?/addMember', allowed: ['admin', 'coordinator'] },
	{ path: '/teams?/removeMember', allowed: ['admin', 'coordinator'] },
	{ path: '/telescopes/new', allowed: ['admin', 'coordinator'] },
	{ path: '/telescopes/{telescopeId}', allowed: ['admin', 'coordinator'] },
	{ path: '/account?/password', allowed: 'all' },
	{ path: '/account?/signOutOthers', allowed: 'all', ok: true },
	{ path: '/account?/notifications', allowed: 'all' },
	// Public by design: the signed token in the link is the permission (one person, one kind of
	// e-mail), so an unsubscribe link works from a mail without signing in. A token that does not
	// verify is refused (400) whoever sends it, signed in or not, and nothing changes.
	{ path: '/unsubscribe/bm90LWEtdmFsaWQtdG9rZW4tYXQtYWxsLWJ1dC1sb25nLWVub3VnaA', allowed: 'all', public: true },
	// Pages by phone: an empty form is refused (no number, no code, no channel chosen); nothing is texted or saved.
	{ path: '/account?/phone', allowed: 'all' },
	{ path: '/account?/verifyPhone', allowed: 'all' },
	{ path: '/account?/channels', allowed: 'all' },
	// Public by design, like unsubscribe links: the signed single-use token is the permission. A token that does not verify is refused (400) for everyone.
	{ path: '/ack/bm90LWEtdmFsaWQtdG9rZW4tYXQtYWxsLWJ1dC1sb25nLWVub3VnaA', allowed: 'all', public: true },
	// The development phone log's "reply as a phone": administrators only; an empty form is refused.
	{ path: '/phone-log?/reply', allowed: ['admin'] },
	{ path: '/?/acknowledge', allowed: ['duty', 'coordinator'] },
	{ path: '/roster?/add', allowed: ['admin', 'coordinator'] },
	{ path: '/roster?/remove', allowed: ['admin', 'coordinator'] },
	{ path: '/roster?/handover', allowed: 'all' },
	{ path: '/events/upload', allowed: ['admin', 'coordinator', 'duty'] },
	{ path: '/triage', allowed: ['admin', 'coordinator'] },
	{ path: '/inbox?/retry', allowed: ['admin', 'coordinator'] },
	{ path: '/inbox/streams?/preview', allowed: ['admin', 'coordinator'] },
	{ path: '/inbox/streams?/save', allowed: ['admin', 'coordinator'] },
	{ path: '/inbox/streams?/reset', allowed: ['admin', 'coordinator'] },
	{ path: '/catalogs/upload', allowed: ['admin', 'coordinator'] },
	// The kilonova rules: an empty form is refused field by field; restoring the defaults needs no input (the thresholds are the defaults here already).
	{ path: '/candidates/rules?/save', allowed: ['coordinator'] },
	{ path: '/candidates/rules?/restore', allowed: ['coordinator'], ok: true },
	// Event pages, on an event of the matrix's own (published in beforeAll).
	{ path: '/events/{eventId}?/acknowledge', allowed: ['duty', 'coordinator'] },
	// Closing needs a reason and a tick (400 without); reopening an event that is not closed is refused (409): nothing changes.
	{ path: '/events/{eventId}?/close', allowed: ['coordinator'] },
	{ path: '/events/{eventId}?/reopen', allowed: ['coordinator'], allowedStatus: 409 },
	{ path: '/events/{eventId}/targets?/claim', allowed: ['observer', 'coordinator'] },
	{ path: '/events/{eventId}/targets?/start', allowed: ['observer', 'coordinator'] },
	{ path: '/events/{eventId}/targets?/done', allowed: ['observer', 'coordinator'] },
	{ path: '/events/{eventId}/targets?/release', allowed: ['observer', 'coordinator'] },
	{ path: '/events/{eventId}/targets?/reassign', allowed: ['coordinator'] },
	{ path: '/events/{eventId}/targets?/lapse', allowed: ['coordinator'] },
	{ path: '/events/{eventId}/targets?/catalog', allowed: ['coordinator'] },
	{ path: '/events/{eventId}/report?/report', allowed: ['observer', 'coordinator'] },
	{ path: '/events/{eventId}/report?/upload', allowed: ['observer', 'coordinator'] },
	{ path: '/events/{eventId}/candidates?/report', allowed: ['observer', 'coordinator'] },
	// The event record: the note (an empty form is refused by validation) and sending (no address is set: nothing is sent).
	{ path: '/events/{eventId}/record?/note', allowed: ['coordinator'] },
	{ path: '/events/{eventId}/record?/send', allowed: ['coordinator'], ok: true },
	{ path: '/admin/mailing-list', allowed: ['admin', 'coordinator'] },
	// Chat webhooks: an empty form is refused by validation.
	{ path: '/admin/webhooks?/add', allowed: ['admin', 'coordinator'] },
	{ path: '/admin/webhooks?/kinds', allowed: ['admin', 'coordinator'] },
	{ path: '/admin/webhooks?/test', allowed: ['admin', 'coordinator'] },
	{ path: '/admin/webhooks?/retry', allowed: ['admin', 'coordinator'] },
	{ path: '/admin/webhooks?/remove', allowed: ['admin', 'coordinator'] },
	// Calendar addresses: everyone has their own; the whole roster's is the coordinators' (revoking when there is none changes nothing).
	{ path: '/account/calendar?/create', allowed: 'all' },
	{ path: '/account/calendar?/revoke', allowed: 'all' },
	{ path: '/account/calendar?/revoke', allowed: ['admin', 'coordinator'], form: { scope: 'roster' }, ok: true },
	// The candidate page, on the matrix's candidate.
	{ path: '/events/{eventId}/candidates/AT-matrix?/photometry', allowed: ['observer', 'spectroscopist', 'coordinator'] },
	// A note over 500 characters: an allowed role is refused it and takes nothing.
	{ path: '/events/{eventId}/candidates/AT-matrix?/take', allowed: ['spectroscopist', 'coordinator'], form: { note: 'x'.repeat(600) } },
	// Nobody holds the candidate: an allowed role is told so (404) and nothing changes.
	{ path: '/events/{eventId}/candidates/AT-matrix?/release', allowed: ['spectroscopist', 'coordinator'], allowedStatus: 404 },
	{ path: '/events/{eventId}/candidates/AT-matrix?/spectrum', allowed: ['spectroscopist', 'coordinator'] },
	{ path: '/events/{eventId}/candidates/AT-matrix?/classify', allowed: ['spectroscopist', 'coordinator'] },
	{ path: '/events/{eventId}/candidates/AT-matrix?/decide', allowed: ['duty', 'observer', 'spectroscopist', 'coordinator'] },
	{ path: '/events/{eventId}/candidates/AT-matrix?/comment', allowed: ['admin', 'coordinator', 'duty', 'observer', 'spectroscopist'] }
];

/**
 * Every role against every mutating API route of the candidate work and of closing an event, on the
 * matrix's event and its candidate (and the event's exports, which every signed-in member may read). Each body is refused by validation, so a role that may act gets `allowedStatus`
 * (nothing is changed), a role that may not gets 403 and nobody signed in gets 401.
 */
const API_MATRIX: { method: 'GET' | 'POST' | 'PUT' | 'DELETE'; path: string; data?: unknown; allowed: RoleName[]; allowedStatus: number }[] = [
	// No reason given (422); the event is not closed, so there is nothing to reopen (409).
	{ method: 'POST', path: '/api/v1/events/{eventId}/close', data: {}, allowed: ['coordinator'], allowedStatus: 422 },
	{ method: 'POST', path: '/api/v1/events/{eventId}/reopen', data: {}, allowed: ['coordinator'], allowedStatus: 409 },
	// An event's record is readable by every signed-in member, never by nobody.
	{ method: 'GET', path: '/events/{eventId}/export/claims.csv', allowed: [...ROLES_LIST], allowedStatus: 200 },
	{ method: 'GET', path: '/events/{eventId}/export/pointings.json', allowed: [...ROLES_LIST], allowedStatus: 200 },
	{ method: 'POST', path: '/api/v1/candidates/{candidateId}/photometry', data: {}, allowed: ['observer', 'spectroscopist', 'coordinator'], allowedStatus: 422 },
	{ method: 'POST', path: '/api/v1/candidates/{candidateId}/spectra', allowed: ['spectroscopist', 'coordinator'], allowedStatus: 422 },
	{ method: 'POST', path: '/api/v1/candidates/{candidateId}/take', data: { note: 'x'.repeat(600) }, allowed: ['spectroscopist', 'coordinator'], allowedStatus: 422 },
	// Nobody holds the candidate: an allowed role is told so.
	{ method: 'DELETE', path: '/api/v1/candidates/{candidateId}/take', allowed: ['spectroscopist', 'coordinator'], allowedStatus: 404 },
	{ method: 'POST', path: '/api/v1/candidates/{candidateId}/classifications', data: {}, allowed: ['spectroscopist', 'coordinator'], allowedStatus: 422 },
	{ method: 'POST', path: '/api/v1/candidates/{candidateId}/decisions', data: {}, allowed: ['duty', 'observer', 'spectroscopist', 'coordinator'], allowedStatus: 422 },
	{ method: 'POST', path: '/api/v1/candidates/{candidateId}/comments', data: {}, allowed: ['admin', 'coordinator', 'duty', 'observer', 'spectroscopist'], allowedStatus: 422 },
	{ method: 'PUT', path: '/api/v1/kilonova-rules', data: { decisionSigma: 'two' }, allowed: ['coordinator'], allowedStatus: 422 }
];

async function client(role: RoleName | null): Promise<APIRequestContext> {
	const ctx = await newRequest.newContext({ baseURL: BASE_URL, extraHTTPHeaders: { origin: BASE_URL, accept: 'text/html' } });
	if (role) {
		const person = DEMO_PEOPLE.find((p) => p.roles.includes(role))!;
		const res = await ctx.post('/sign-in', { form: { email: person.email, password: person.password }, maxRedirects: 0 });
		expect(res.status(), `sign in as ${role}`).toBe(303);
	}
	return ctx;
}

let telescopeId = '';
let eventId = '';
let candidateId = '';
test.beforeAll(async () => {
	const admin = await client('admin');
	const html = await (await admin.get('/telescopes')).text();
	telescopeId = html.match(/href="\/telescopes\/([a-z0-9]+)"/)![1];
	await admin.dispose();
	// The fixture notice under a name of the matrix's own; its sky-map host is not allowed, so it has no map (not needed here).
	const coordinator = await client('coordinator');
	const xml = readFileSync('tests/fixtures/notices/bns-initial.xml', 'utf8').replaceAll('SX30041207', 'SX30070101');
	const res = await coordinator.post('/api/v1/notices', { data: xml, headers: { 'content-type': 'application/xml' } });
	expect(res.status(), await res.text()).toBe(201);
	eventId = (await res.json()).eventId;
	await coordinator.dispose();
	// A candidate of that event, written directly: the fixture's merger lies in the future, so the report form would refuse it.
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	const teamId = (sqlite.prepare('SELECT id FROM team ORDER BY name LIMIT 1').get() as { id: string }).id;
	candidateId = 'matrixcandidate1';
	sqlite
		.prepare('INSERT INTO candidate (id, event_id, name, ra_deg, dec_deg, discovered_at, magnitude, filter, team_id) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)')
		.run(candidateId, eventId, 'AT-matrix', 150, -30, Date.parse('2030-04-12T09:00:00Z'), 20, 'r', teamId);
	sqlite.close();
});
// Leave the board as the other tests expect it (they start from an empty board): remove the matrix's event.
test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	sqlite.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	sqlite.close();
});

for (const role of [...ROLES_LIST, null] as const) {
	test(`permissions matrix: ${role ?? 'signed out'}`, async () => {
		const ctx = await client(role);
		const seen: string[] = [];
		const wanted: string[] = [];
		for (const row of MATRIX) {
			const res = await ctx.post(row.path.replace('{telescopeId}', telescopeId).replace('{eventId}', eventId), { form: row.form ?? {}, maxRedirects: 0 });
			const allowed = row.public || (role !== null && (row.allowed === 'all' || row.allowed.includes(role)));
			const expected = role === null && !row.public ? '303 /sign-in' : !allowed ? 403 : row.ok ? 200 : (row.allowedStatus ?? 400);
			const location = res.headers()['location']?.split('?')[0];
			const label = row.form ? `${row.path} ${JSON.stringify(row.form)}` : row.path;
			seen.push(`${label} ${res.status()}${location ? ' ' + location : ''}`);
			wanted.push(`${label} ${expected}`);
		}
		expect(seen).toEqual(wanted);
		await ctx.dispose();
	});

	test(`API permissions matrix: ${role ?? 'signed out'}`, async () => {
		const ctx = await client(role);
		const seen: string[] = [];
		const wanted: string[] = [];
		for (const row of API_MATRIX) {
			const url = row.path.replace('{candidateId}', candidateId).replace('{eventId}', eventId);
			const res = await ctx.fetch(url, { method: row.method, headers: { accept: 'application/json' }, ...(row.data !== undefined ? { data: row.data } : {}) });
			const expected = role === null ? 401 : row.allowed.includes(role) ? row.allowedStatus : 403;
			seen.push(`${row.method} ${row.path} ${res.status()}`);
			wanted.push(`${row.method} ${row.path} ${expected}`);
		}
		expect(seen).toEqual(wanted);
		await ctx.dispose();
	});
}

test('the API refuses without credentials in its error shape', async () => {
	const ctx = await client(null);
	const res = await ctx.get('/api/v1/me');
	expect(res.status()).toBe(401);
	expect(await res.json()).toEqual({ error: { code: 'unauthenticated', message: expect.any(String) } });
	await ctx.dispose();
});
