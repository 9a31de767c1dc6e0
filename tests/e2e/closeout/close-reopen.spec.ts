import { test, expect, request as newRequest, type Page } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import Database from 'better-sqlite3';
import { demo, signInAs } from '../support/people';
import { noticeXml } from '../support/events';
import { BASE_URL } from '../../../playwright.config';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });
const SOURCE_ID = 'SX30120201';
let eventId = '';

/** One pointing on the report page: the first telescope, its first filter, a minute ago. */
async function reportPointing(page: Page) {
	const telescope = await page.getByLabel('Telescope').first().locator('option:checked').innerText();
	const filter = telescope.match(/filters ([^,;)]+)/)![1].trim();
	await page.getByLabel('Time (UTC)').fill(new Date(Date.now() - 60_000).toISOString().slice(0, 19) + 'Z');
	await page.getByLabel('RA (deg, J2000)').fill('120.5');
	await page.getByLabel('Dec (deg, J2000)').fill('-5.25');
	await page.getByLabel('Filter', { exact: true }).fill(filter);
	await page.getByLabel('Exposure (s)').fill('60');
	await page.getByLabel('Limiting magnitude (AB)').fill('20.5');
	await page.getByRole('button', { name: 'Report pointing' }).click();
}

test('a coordinator closes an event: a later pointing is refused naming who closed it and why; reopened, it is accepted', async ({ browser }) => {
	test.setTimeout(60_000);
	const coordinator = await (await browser.newContext()).newPage();
	const coordinatorName = (await signInAs(coordinator, 'coordinator')).name;
	// The fixture notice moved to now, without a sky map (pointings given by RA/Dec need none).
	const published = await coordinator.request.post('/api/v1/notices', { data: noticeXml(SOURCE_ID), headers: { 'content-type': 'application/xml', origin: BASE_URL } });
	expect(published.status(), await published.text()).toBe(201);
	eventId = (await published.json()).eventId;

	// The observer has the report page open before the event is closed.
	const observer = await (await browser.newContext()).newPage();
	await signInAs(observer, 'observer');
	await observer.goto(`/events/${eventId}/report`);
	await expect(observer.getByTestId('report-form')).toBeVisible();
	await expect(observer.locator('[data-hydrated="yes"]')).toBeVisible();

	// The coordinator closes it with a reason and a note.
	await coordinator.goto(`/events/${eventId}`);
	await expect(coordinator.locator('[data-hydrated="yes"]')).toBeVisible();
	await coordinator.getByTestId('close-panel').locator('summary').click();
	await coordinator.getByLabel('Why').selectOption('search-complete');
	await coordinator.getByLabel('Note (optional)').fill('Region covered to 21 mag; nothing found.');
	await coordinator.getByRole('button', { name: 'Close event' }).click();
	await expect(coordinator.getByTestId('error-confirm')).toBeVisible();
	await coordinator.getByTestId('close-confirm').check();
	await coordinator.getByRole('button', { name: 'Close event' }).click();
	const banner = coordinator.getByTestId('closed-banner');
	await expect(banner).toBeVisible();
	await expect(banner.getByTestId('closed-by')).toHaveText(coordinatorName);
	await expect(banner.getByTestId('closed-reason')).toHaveText('search complete');
	await expect(banner.getByTestId('closed-note')).toContainText('Region covered to 21 mag; nothing found.');
	await expect(coordinator.getByTestId('event-page')).toHaveAttribute('data-state', 'closed');
	await coordinator.screenshot({ path: `${SCREENS}/closeout-1-closed.png`, fullPage: true });

	// The observer's pointing, from the page opened before, is refused with who closed it and why; nothing is stored.
	await reportPointing(observer);
	const refusal = observer.getByTestId('report-message');
	await expect(refusal).toContainText(`This event was closed by ${coordinatorName}`);
	await expect(refusal).toContainText('(search complete)');
	await expect(refusal).toContainText('Ask a coordinator to reopen it.');
	await expect(observer.getByTestId('report-ok')).toHaveCount(0);
	// Opened afresh, the page says so instead of showing the form.
	await observer.reload();
	await expect(observer.getByTestId('closed-notice')).toContainText(coordinatorName);
	await expect(observer.getByTestId('report-form')).toHaveCount(0);
	await observer.screenshot({ path: `${SCREENS}/closeout-2-report-closed.png`, fullPage: true });

	// The record can still be downloaded.
	const csv = await coordinator.request.get(`/events/${eventId}/export/pointings.csv`);
	expect(csv.status()).toBe(200);
	expect((await csv.text()).split('\r\n')[0]).toMatch(/^observation_id,observed_at,/);

	// The coordinator reopens it; the observer's pointing is then accepted.
	await coordinator.getByLabel('Note on reopening (optional)').fill('A partner asked for one more night.');
	await coordinator.getByTestId('reopen-button').click();
	await expect(coordinator.getByTestId('reopened-ok')).toBeVisible();
	await expect(coordinator.getByTestId('closed-banner')).toHaveCount(0);
	await expect(coordinator.getByTestId('event-page')).toHaveAttribute('data-state', 'active');
	await observer.reload();
	await expect(observer.getByTestId('report-form')).toBeVisible();
	await expect(observer.locator('[data-hydrated="yes"]')).toBeVisible();
	await reportPointing(observer);
	await expect(observer.getByTestId('report-ok')).toBeVisible();
	await coordinator.context().close();
	await observer.context().close();
});

// Leave things as the other specs expect them: the event reopened (if the test stopped half-way), then removed.
test.afterAll(async () => {
	if (!eventId) return;
	const ctx = await newRequest.newContext({ baseURL: BASE_URL, extraHTTPHeaders: { origin: BASE_URL } });
	const c = demo('coordinator');
	await ctx.post('/sign-in', { form: { email: c.email, password: c.password }, maxRedirects: 0 });
	const res = await ctx.post(`/api/v1/events/${eventId}/reopen`, { data: {} });
	expect([200, 409]).toContain(res.status());
	await ctx.dispose();
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	sqlite.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	sqlite.close();
});
