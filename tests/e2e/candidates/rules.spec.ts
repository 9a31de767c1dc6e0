import { test, expect } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import Database from 'better-sqlite3';
import { signInAs } from '../support/people';
import { BASE_URL } from '../../../playwright.config';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

// Whatever happens here, the next specs find the default thresholds.
test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.prepare('DELETE FROM kilonova_rules').run();
	sqlite.close();
});

test('a coordinator changes a kilonova threshold (a bad value first, kept to fix) and restores the defaults; an observer only reads them', async ({ browser }) => {
	test.setTimeout(60_000);
	const coordinator = await (await browser.newContext({ viewport: { width: 1280, height: 900 } })).newPage();
	await signInAs(coordinator, 'coordinator');
	await coordinator.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Kilonova rules' }).click();
	await expect(coordinator.getByTestId('kilonova-rules-page')).toBeVisible();
	await expect(coordinator.locator('[data-hydrated="yes"]')).toBeVisible();
	const fade = coordinator.locator('[data-testid="rule-section"][data-rule="fastFade"]');
	await expect(fade.getByTestId('rule-source')).toContainText('from memory');
	await expect(coordinator.locator('[data-rule="inCredibleRegion"]').getByTestId('rule-source')).toContainText('common practice');
	await expect(fade.getByLabel('Fade rate (mag/day)')).toHaveValue('0.3');

	// A value that is not a number and one out of range: both named beside their fields, everything typed kept, nothing saved.
	await fade.getByLabel('Fade rate (mag/day)').fill('fast');
	await fade.getByLabel('Fade window (days)').fill('90');
	await coordinator.getByRole('button', { name: 'Save thresholds' }).click();
	await expect(coordinator.getByTestId('error-fastFade.minRateMagPerDay')).toHaveText('Fade rate (mag/day) must be a number.');
	await expect(coordinator.getByTestId('error-fastFade.withinDays')).toHaveText('The fade window must be between 0.5 days and 60 days.');
	await expect(coordinator.getByTestId('rules-not-saved')).toContainText('2 values need fixing');
	await expect(fade.getByLabel('Fade rate (mag/day)')).toHaveValue('fast');
	await expect(fade.getByLabel('Fade window (days)')).toHaveValue('90');
	await expect(coordinator.getByTestId('rules-saved')).toHaveCount(0);
	await coordinator.screenshot({ path: `${SCREENS}/rules-1-refused-1280.png`, fullPage: true });

	await fade.getByLabel('Fade rate (mag/day)').fill('0.45');
	await fade.getByLabel('Fade window (days)').fill('7');
	await coordinator.getByRole('button', { name: 'Save thresholds' }).click();
	await expect(coordinator.getByTestId('rules-saved')).toContainText('Thresholds saved');
	await expect(fade.getByLabel('Fade rate (mag/day)')).toHaveValue('0.45');
	await expect(fade.getByTestId('rule-changed')).toBeVisible();
	await expect(fade.getByTestId('rule-label')).toHaveText('Fades faster than 0.45 mag/day within 7 days of the merger');
	await expect(coordinator.getByTestId('rule-changed')).toHaveCount(1);
	await expect(coordinator.getByTestId('rules-updated')).toContainText('by Tomás Okafor-Reyes');
	// The API reads the same thresholds: the page saved through the domain, changes only.
	const api = (await (await coordinator.request.get('/api/v1/kilonova-rules')).json()) as { changes: unknown; thresholds: { fastFade: { minRateMagPerDay: number } } };
	expect(api.changes).toEqual({ fastFade: { minRateMagPerDay: 0.45 } });
	await coordinator.screenshot({ path: `${SCREENS}/rules-2-saved-1280.png`, fullPage: true });
	await coordinator.setViewportSize({ width: 390, height: 844 });
	await coordinator.screenshot({ path: `${SCREENS}/rules-3-saved-390.png`, fullPage: true });

	// An observer: no menu link, the page only to read, and the save refused.
	const observer = await (await browser.newContext({ viewport: { width: 1280, height: 900 } })).newPage();
	await signInAs(observer, 'observer');
	await expect(observer.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Kilonova rules' })).toHaveCount(0);
	await observer.goto('/candidates');
	await observer.getByTestId('rules-link').click();
	await expect(observer.getByTestId('kilonova-rules-page')).toBeVisible();
	await expect(observer.locator('[data-field="fastFade.minRateMagPerDay"]').getByTestId('rule-value')).toHaveText('0.45');
	await expect(observer.getByRole('textbox')).toHaveCount(0);
	await expect(observer.getByRole('button', { name: 'Save thresholds' })).toHaveCount(0);
	await expect(observer.getByRole('button', { name: 'Restore defaults' })).toHaveCount(0);
	const refused = await observer.request.post('/candidates/rules?/save', { form: { 'fastFade.minRateMagPerDay': '0.1' }, headers: { origin: BASE_URL, accept: 'text/html' }, maxRedirects: 0 });
	expect(refused.status()).toBe(403);
	await observer.screenshot({ path: `${SCREENS}/rules-4-observer-1280.png`, fullPage: true });
	await observer.context().close();

	// Back to the defaults.
	await coordinator.setViewportSize({ width: 1280, height: 900 });
	await coordinator.getByRole('button', { name: 'Restore defaults' }).click();
	await expect(coordinator.getByTestId('rules-saved')).toContainText('default thresholds are back');
	await expect(fade.getByLabel('Fade rate (mag/day)')).toHaveValue('0.3');
	await expect(coordinator.getByTestId('rule-changed')).toHaveCount(0);
	expect(((await (await coordinator.request.get('/api/v1/kilonova-rules')).json()) as { changes: unknown }).changes).toEqual({});
	await coordinator.context().close();
});
