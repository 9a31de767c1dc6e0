import { test, expect, request as newRequest, type APIRequestContext } from '@playwright/test';
import { readFileSync } from 'node:fs';
import Database from 'better-sqlite3';
import { DEMO_PEOPLE } from '../../../seeds/scenario';
import type { RoleName } from '../../../src/lib/roles';
import { BASE_URL } from '../../../playwright.config';

/** The candidate-work API over HTTP: the content type decides CSV or JSON, multipart uploads, the take race. */

async function client(role: RoleName): Promise<APIRequestContext> {
	const ctx = await newRequest.newContext({ baseURL: BASE_URL, extraHTTPHeaders: { origin: BASE_URL, accept: 'text/html' } });
	const person = DEMO_PEOPLE.find((p) => p.roles.includes(role))!;
	const res = await ctx.post('/sign-in', { form: { email: person.email, password: person.password }, maxRedirects: 0 });
	expect(res.status(), `sign in as ${role}`).toBe(303);
	return ctx;
}

const database = () => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	return sqlite;
};

let eventId = '';
const candidateId = 'workapicandidate';
test.beforeAll(async () => {
	const coordinator = await client('coordinator');
	const xml = readFileSync('tests/fixtures/notices/bns-initial.xml', 'utf8').replaceAll('SX30041207', 'SX30070202');
	const res = await coordinator.post('/api/v1/notices', { data: xml, headers: { 'content-type': 'application/xml' } });
	expect(res.status(), await res.text()).toBe(201);
	eventId = (await res.json()).eventId;
	await coordinator.dispose();
	// Written directly: the fixture's merger lies in the future, so the report form would refuse the discovery time.
	const sqlite = database();
	const teamId = (sqlite.prepare('SELECT id FROM team ORDER BY name LIMIT 1').get() as { id: string }).id;
	sqlite
		.prepare('INSERT INTO candidate (id, event_id, name, ra_deg, dec_deg, discovered_at, magnitude, filter, team_id) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)')
		.run(candidateId, eventId, 'AT-work-api', 150, -30, Date.parse('2030-04-12T09:00:00Z'), 20, 'r', teamId);
	sqlite.close();
});
test.afterAll(() => {
	const sqlite = database();
	sqlite.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	sqlite.close();
});

test('photometry: text/csv is read as CSV, JSON as rows; problems come back numbered and nothing is stored', async () => {
	const observer = await client('observer');
	const url = `/api/v1/candidates/${candidateId}/photometry`;
	const bad = await observer.post(url, { data: 'time,filter,mag,mag_err,limit\n2026-01-02T03:04:05Z,r,20.1,0.1,\n2026-01-02T04:04:05Z,r,x,0.1,\n', headers: { 'content-type': 'text/csv' } });
	expect(bad.status()).toBe(422);
	expect(await bad.json()).toEqual({
		error: { code: 'invalid_photometry', message: '1 problem; nothing stored. line 3: magnitude "x" is not a number', details: [{ line: 3, message: 'magnitude "x" is not a number' }] }
	});
	const csv = await observer.post(url, { data: 'time,filter,mag,mag_err,limit\n2026-01-02T03:04:05Z,r,20.1,0.1,\n2026-01-02T04:04:05Z,g,,,21.5\n', headers: { 'content-type': 'text/csv' } });
	expect(csv.status(), await csv.text()).toBe(201);
	expect((await csv.json()).added).toBe(2);
	const rows = await observer.post(url, { data: { rows: [{ time: '2026-01-03T03:04:05Z', filter: 'r', mag: 20.6, mag_err: 0.1 }, { time: 'yesterday', filter: 'r', limit: 21 }] } });
	expect(rows.status()).toBe(422);
	expect((await rows.json()).error.details).toEqual([{ row: 2, message: 'time "yesterday" is not an ISO 8601 time such as 2026-12-02T03:04:05Z' }]);
	const good = await observer.post(url, { data: { rows: [{ time: '2026-01-03T03:04:05Z', filter: 'r', mag: 20.6, mag_err: 0.1 }] } });
	expect(good.status()).toBe(201);
	const detail = await (await observer.get(`/api/v1/candidates/${candidateId}`)).json();
	expect(detail.photometry.map((p: { filter: string }) => p.filter)).toEqual(['r', 'g', 'r']);
	expect(detail.vetting.rules.verdict).toBeDefined();
	await observer.dispose();
});

test('spectroscopy: one taker at a time; a multipart spectrum is read before it is stored', async () => {
	const spectro = await client('spectroscopist');
	const coordinator = await client('coordinator');
	const take = `/api/v1/candidates/${candidateId}/take`;
	expect((await spectro.post(take, { data: { note: 'tonight' } })).status()).toBe(201);
	const lost = await coordinator.post(take, { data: {} });
	expect(lost.status()).toBe(409);
	expect((await lost.json()).error).toMatchObject({ code: 'taken', message: expect.stringMatching(/^Priya Marchetti is already getting a spectrum of this candidate/) });

	const spectra = `/api/v1/candidates/${candidateId}/spectra`;
	const broken = await spectro.post(spectra, { multipart: { file: { name: 'one-column.txt', mimeType: 'text/plain', buffer: readFileSync('tests/fixtures/candidates/spectra/bad-one-column.txt') } } });
	expect(broken.status()).toBe(422);
	expect((await broken.json()).error.code).toBe('invalid_spectrum');
	const ok = await spectro.post(spectra, {
		multipart: { file: { name: 'at-work.txt', mimeType: 'text/plain', buffer: readFileSync('tests/fixtures/candidates/spectra/ascii-basic.txt') }, notes: 'blue continuum' }
	});
	expect(ok.status(), await ok.text()).toBe(201);
	const { spectrum } = await ok.json();
	expect(spectrum).toMatchObject({ originalName: 'at-work.txt', format: 'ascii', notes: 'blue continuum' });
	const file = await spectro.get(`${spectra}/${spectrum.id}`);
	expect(Buffer.compare(await file.body(), readFileSync('tests/fixtures/candidates/spectra/ascii-basic.txt'))).toBe(0);
	const detail = await (await spectro.get(`/api/v1/candidates/${candidateId}`)).json();
	expect(detail.spectra).toHaveLength(1);
	expect(detail.take).toBeNull();
	const classified = await spectro.post(`/api/v1/candidates/${candidateId}/classifications`, { data: { label: 'sn-ia', confidence: 'medium', spectrumId: spectrum.id } });
	expect(classified.status()).toBe(201);
	expect((await classified.json()).summary.text).toBe('Classified as type Ia supernova (medium) by Priya Marchetti.');
	await spectro.dispose();
	await coordinator.dispose();
});
