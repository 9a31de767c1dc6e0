import { test, expect } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import Database from 'better-sqlite3';
import { signInAs } from '../support/people';
import { publishNightEvent, nightPeak } from '../support/events';
import { newestMail } from '../support/mail';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

const SOURCE_ID = 'SX30120241';
let eventId = '';

function database() {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	return sqlite;
}

test.afterAll(() => {
	const sqlite = database();
	if (eventId) sqlite.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	// Other specs expect no mailing list.
	sqlite.prepare('DELETE FROM collaboration_setting').run();
	sqlite.close();
});

test('a coordinator writes the record’s note and downloads it as Markdown and PDF; a viewer reads it', async ({ browser }) => {
	test.setTimeout(120_000);
	const page = await (await browser.newContext({ viewport: { width: 1280, height: 900 }, acceptDownloads: true })).newPage();
	await signInAs(page, 'coordinator');
	eventId = await publishNightEvent(page, SOURCE_ID);

	// Two overlapping pointings at the map's peak, reported as a program would (the coordinator's session).
	const sqlite = database();
	const telescope = sqlite.prepare("SELECT id FROM telescope WHERE name = 'Karoo Schmidt 1.0 m'").get() as { id: string };
	sqlite.close();
	const peak = nightPeak();
	for (const [k, dRa] of [0, 1].entries()) {
		const res = await page.request.post('/api/v1/observations', {
			data: { eventId, telescopeId: telescope.id, observedAt: new Date(Date.now() - (5 - k) * 60_000).toISOString(), raDeg: (peak.raDeg + dRa + 360) % 360, decDeg: 0, filter: 'r', exposureS: 90, limitingMag: 20.5 + k }
		});
		expect(res.status(), await res.text()).toBe(201);
	}

	await page.goto(`/events/${eventId}`);
	await page.getByTestId('record-link').click();
	await expect(page.getByTestId('record-page')).toBeVisible();
	await expect(page.locator('[data-hydrated="yes"]')).toBeVisible();

	// The page shows what the API computes.
	const api = await (await page.request.get(`/api/v1/events/${eventId}/report`)).json();
	expect(api.counts.observations).toBe(2);
	expect(api.coverage.sky).toBeGreaterThan(0);
	// Two overlapping footprints: the union is less than their sum.
	expect(api.coverage.sky).toBeLessThan(api.coverage.sumOfFootprints);
	const skyText = `${(api.coverage.sky * 100).toFixed(1)}%`;
	await expect(page.getByTestId('record-sky')).toHaveText(skyText);
	await expect(page.getByTestId('record-by-team')).toContainText('Karoo Wide Field');
	await expect(page.getByTestId('bulletin')).toContainText(`cover ${skyText} of the probability`);

	// The field stops typing at the limit; a longer note sent anyway is refused with the reason.
	const tooLong = await page.request.post(`/events/${eventId}/record?/note`, { form: { note: 'x'.repeat(4100) }, headers: { origin: new URL(page.url()).origin } });
	// Answered as to an enhanced form: { type: 'failure', status: 400, data } with the field's message.
	const refused = await tooLong.json();
	expect([refused.type, refused.status]).toEqual(['failure', 400]);
	expect(refused.data).toContain('under 4000 characters');
	const note = page.getByLabel(/What the numbers do not say/);
	await note.fill('Cloud over the Karoo after the second pointing; Tenaz 2.0 m lost to wind.');
	await page.getByRole('button', { name: 'Save note' }).click();
	await expect(page.getByTestId('note-done')).toContainText('Note saved');
	await page.screenshot({ path: `${SCREENS}/record-1280.png`, fullPage: true });

	const [md] = await Promise.all([page.waitForEvent('download'), page.getByTestId('download-md').click()]);
	expect(md.suggestedFilename()).toBe(`${SOURCE_ID}-record.md`);
	const mdText = (await import('node:fs')).readFileSync((await md.path())!, 'utf8');
	expect(mdText).toContain(`# Event record: ${SOURCE_ID}`);
	expect(mdText).toContain('> Cloud over the Karoo after the second pointing; Tenaz 2.0 m lost to wind.');
	expect(mdText).toContain(`**${skyText}**`);

	const [pdf] = await Promise.all([page.waitForEvent('download'), page.getByTestId('download-pdf').click()]);
	expect(pdf.suggestedFilename()).toBe(`${SOURCE_ID}-record.pdf`);
	const bytes = (await import('node:fs')).readFileSync((await pdf.path())!);
	expect(bytes.subarray(0, 5).toString('latin1')).toBe('%PDF-');
	expect(bytes.length).toBeGreaterThan(20_000);
	(await import('node:fs')).writeFileSync(`${SCREENS}/record.pdf`, bytes);

	// The mailing list: a bad address is refused and kept, a good one is saved, and the record goes there.
	const list = `records-${Date.now()}@list.strainline.demo`;
	await page.goto('/admin/mailing-list');
	await expect(page.locator('[data-hydrated="yes"]')).toBeVisible();
	await page.getByLabel('List address').fill('not an address');
	await page.getByRole('button', { name: 'Save', exact: true }).click();
	await expect(page.getByTestId('error-address')).toContainText('not a valid e-mail address');
	await expect(page.getByLabel('List address')).toHaveValue('not an address');
	await page.getByLabel('List address').fill(list);
	await page.getByRole('button', { name: 'Save', exact: true }).click();
	await expect(page.getByTestId('form-done')).toContainText(list);
	await page.goto(`/events/${eventId}/record`);
	await expect(page.getByTestId('list-address')).toHaveText(list);
	await page.getByTestId('send-record').click();
	// Making the PDF takes a moment on a busy machine.
	await expect(page.getByTestId('send-done')).toContainText(`Sent to ${list}`, { timeout: 30_000 });
	const mail = await newestMail(list, `Event record ${SOURCE_ID}`);
	expect(mail.attachments).toMatch(new RegExp(`${SOURCE_ID}-record\\.md \\(text/markdown.*${SOURCE_ID}-record\\.pdf \\(application/pdf, \\d+ bytes\\)`));
	expect(mail.text).toContain(`cover ${skyText} of the probability`);

	// A viewer reads the record and its note, without the form or the sending.
	const viewer = await (await browser.newContext({ viewport: { width: 390, height: 844 } })).newPage();
	await signInAs(viewer, 'viewer');
	await viewer.goto(`/events/${eventId}/record`);
	await expect(viewer.getByTestId('record-note')).toContainText('Cloud over the Karoo');
	await expect(viewer.getByTestId('note-form')).toHaveCount(0);
	await expect(viewer.getByTestId('send-record')).toHaveCount(0);
	await viewer.screenshot({ path: `${SCREENS}/record-390.png`, fullPage: true });
	await viewer.context().close();
	await page.context().close();
});
