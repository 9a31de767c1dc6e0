import { test, expect, request as newRequest } from '@playwright/test';
import Database from 'better-sqlite3';
import ICAL from 'ical.js';
import { signInAs } from '../support/people';
import { BASE_URL } from '../../../playwright.config';

const HOOK_NAME = `E2E follow-up room ${Date.now()}`;

test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	sqlite.prepare('DELETE FROM chat_webhook WHERE name = ?').run(HOOK_NAME);
	sqlite.close();
});

test('a coordinator adds a chat webhook for the fake receiver, a test message reaches it, and the settings page shows it delivered', async ({ page }) => {
	await signInAs(page, 'coordinator');
	await page.goto('/admin/webhooks');
	const receiver = (await page.getByTestId('fake-receiver-url').textContent())!.replace(/any-name$/, 'e2e-room');
	expect(receiver).toMatch(/^http:\/\/127\.0\.0\.1:\d+\/hook\/e2e-room$/);

	// A private address is refused beside the field, and what was typed stays.
	const form = page.getByTestId('webhook-form');
	await form.getByLabel('Name').fill(HOOK_NAME);
	await form.getByLabel('Webhook address').fill('https://10.0.0.1/hook');
	await form.getByRole('button', { name: 'Add webhook' }).click();
	await expect(page.getByTestId('error-url')).toContainText('private network');
	await expect(form.getByLabel('Name')).toHaveValue(HOOK_NAME);

	await form.getByLabel('Webhook address').fill(receiver);
	await form.getByRole('button', { name: 'Add webhook' }).click();
	await expect(page.getByTestId('form-done')).toContainText(`Webhook “${HOOK_NAME}” added`);
	const hook = page.getByTestId('webhook').filter({ hasText: HOOK_NAME });
	await expect(hook.getByText('/hook/…')).toBeVisible();

	await hook.getByTestId('webhook-test').click();
	await expect(page.getByTestId('form-done')).toContainText('Test message queued');
	// Delivered off the request path; the page looks again while something waits.
	await expect(hook.getByTestId('delivery').first()).toHaveAttribute('data-state', 'delivered', { timeout: 10_000 });
	await expect(hook.getByTestId('delivery').first()).toContainText('HTTP 200');
	await expect(hook.getByTestId('delivery').first()).toContainText('attempt 1 of');
});

test('a duty scientist subscribes to their shifts: the copied address is a calendar, and revoked it answers 404', async ({ page, context }) => {
	await context.grantPermissions(['clipboard-read', 'clipboard-write']);
	await signInAs(page, 'duty');
	await page.goto('/roster');
	await page.getByRole('link', { name: 'See your shifts in your calendar' }).click();
	await expect(page).toHaveURL(/\/account\/calendar$/);
	const mine = page.getByTestId('feed-mine');
	await mine.getByTestId('feed-create').click();
	await expect(mine.getByTestId('feed-url')).toBeVisible();
	await mine.getByTestId('feed-copy').click();
	await expect(mine.getByTestId('feed-copy')).toHaveText('Copied');
	const url = await page.evaluate(() => navigator.clipboard.readText());
	expect(url).toMatch(new RegExp(`^${BASE_URL}/calendar/stlcal_[A-Za-z0-9_-]+\\.ics$`));
	await expect(page.getByTestId('feed-mine').getByTestId('feed-state')).toContainText('An address is active');

	// A calendar program: no cookies.
	const program = await newRequest.newContext();
	const res = await program.get(url);
	expect(res.status()).toBe(200);
	expect(res.headers()['content-type']).toContain('text/calendar');
	const cal = new ICAL.Component(ICAL.parse(await res.text()));
	expect(cal.name).toBe('vcalendar');
	expect(cal.getFirstPropertyValue('x-wr-timezone')).toBeTruthy();
	// The demo duty scientist is on shift now (seeds/demo.ts).
	expect(cal.getAllSubcomponents('vevent').length).toBeGreaterThan(0);
	for (const e of cal.getAllSubcomponents('vevent').map((v) => new ICAL.Event(v))) {
		expect(e.uid).toMatch(/^shift-.+@strainline$/);
		expect(e.startDate.zone.tzid).toBe('UTC');
		expect(e.summary).toMatch(/^Duty shift/);
	}

	await mine.getByTestId('feed-revoke').click();
	await expect(page.getByTestId('form-done')).toContainText('revoked');
	expect((await program.get(url)).status()).toBe(404);
	await program.dispose();
});
