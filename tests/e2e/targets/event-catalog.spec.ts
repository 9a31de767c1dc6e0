import { test, expect, type Browser, type Page } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import Database from 'better-sqlite3';
import { signInAs } from '../support/people';
import { publishNightEvent } from '../support/events';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

const SOURCE_ID = 'SX30061501';
const FOUR_NAME = 'Four test galaxies (browser test)';
/** A four-galaxy test file, far from any map this test makes (they sit opposite the Sun, on the equator). */
const FOUR = 'id,ra,dec,distance\nFOUR-1,10,80,100\nFOUR-2,100,80,100\nFOUR-3,190,80,100\nFOUR-4,280,80,100\n';

async function signedIn(browser: Browser, role: string): Promise<Page> {
	const page = await (await browser.newContext()).newPage();
	await signInAs(page, role);
	return page;
}

async function waitForGalaxies(page: Page) {
	const rows = page.getByTestId('galaxy-row');
	await expect(async () => {
		if ((await rows.count()) === 0) await page.reload();
		await expect(rows.first()).toBeVisible({ timeout: 2000 });
	}).toPass({ timeout: 60_000 });
}

// Leave the catalogue in use as the other tests expect: remove the test file (its galaxies go with it).
test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	sqlite.prepare('DELETE FROM catalog WHERE name = ?').run(FOUR_NAME);
	sqlite.close();
});

test('importing a catalogue leaves a live event alone; the coordinator switches it after confirming, sees the claim left outside, and switches back', async ({ browser }) => {
	test.setTimeout(300_000);
	const coordinator = await signedIn(browser, 'coordinator');
	const eventId = await publishNightEvent(coordinator, SOURCE_ID);

	// An observer claims the top galaxy.
	const observer = await signedIn(browser, 'observer');
	await observer.goto(`/events/${eventId}/targets`);
	await waitForGalaxies(observer);
	const top = observer.locator('[data-testid="galaxy-row"][data-rank="1"]');
	const galaxyName = (await top.locator('td').nth(1).innerText()).trim();
	await top.getByRole('button', { name: /^Claim / }).click();
	await expect(top.getByTestId('claim-state')).toHaveText('claimed', { timeout: 15_000 });
	const catalogBefore = await observer.getByTestId('event-catalog-current').getAttribute('data-catalog-id');
	expect(catalogBefore).toBeTruthy();

	// A four-galaxy test file is imported: it becomes the one for new events only.
	const imported = await coordinator.request.post(`/catalogs/upload?name=${encodeURIComponent(FOUR_NAME)}`, {
		data: FOUR,
		headers: { 'content-type': 'text/csv', origin: new URL(coordinator.url()).origin }
	});
	expect(imported.status(), await imported.text()).toBe(201);
	await coordinator.goto('/catalogs');
	await expect(coordinator.getByTestId('catalog-row').filter({ hasText: FOUR_NAME })).toContainText('in use for new events');

	// The live event still shows its ranking and the claim, everywhere.
	await observer.reload();
	await waitForGalaxies(observer);
	await expect(observer.getByTestId('event-catalog-current')).toHaveAttribute('data-catalog-id', catalogBefore!);
	await expect(top.locator('td').nth(1)).toHaveText(galaxyName);
	await expect(top.getByTestId('claim-state')).toHaveText('claimed');
	await expect(observer.getByTestId('outside-claims')).toHaveCount(0);
	// Observers see the catalogue but cannot switch it.
	await expect(observer.getByTestId('event-catalog-form')).toHaveCount(0);

	// The coordinator asks to switch: a confirmation step, and nothing changes until it is answered.
	await coordinator.goto(`/events/${eventId}/targets`);
	await expect(coordinator.locator('[data-hydrated="yes"]')).toBeVisible();
	const fourId = await coordinator.locator('#event-catalog-choice option').filter({ hasText: FOUR_NAME }).getAttribute('value');
	await coordinator.getByLabel('Rank against another catalogue').selectOption(fourId!);
	await coordinator.getByRole('button', { name: 'Switch catalogue…' }).click();
	const confirm = coordinator.getByTestId('confirm-catalog');
	await expect(confirm).toContainText(`Switch live event ${SOURCE_ID}`, { timeout: 15_000 });
	await expect(confirm).toContainText(FOUR_NAME);
	await expect(confirm.getByTestId('confirm-catalog-outside')).toHaveText('1 claim');
	await coordinator.screenshot({ path: `${SCREENS}/event-catalog-1-confirm.png`, fullPage: true });
	await expect(coordinator.getByTestId('event-catalog-current')).toHaveAttribute('data-catalog-id', catalogBefore!);

	await confirm.getByRole('button', { name: 'Yes, switch and re-rank' }).click();
	await expect(coordinator.getByTestId('event-catalog-switched')).toContainText(FOUR_NAME, { timeout: 15_000 });
	await expect(coordinator.getByTestId('event-catalog-current')).toHaveAttribute('data-catalog-id', fourId!);

	// Re-ranked against four far-away galaxies: none ranked, and the claim is listed apart, not hidden, on every page.
	for (const page of [coordinator, observer]) {
		await expect(async () => {
			await page.reload();
			await expect(page.getByTestId('galaxies-empty')).toBeVisible({ timeout: 2000 });
		}).toPass({ timeout: 60_000 });
		const outside = page.getByTestId('outside-claims').getByTestId('outside-claim');
		await expect(outside).toHaveCount(1);
		await expect(outside).toContainText(galaxyName);
		await expect(outside.getByTestId('outside-state')).toHaveText('claimed');
	}
	// The claiming team can still act on it.
	await expect(observer.getByTestId('outside-claims').getByRole('button', { name: `Start ${galaxyName}` })).toBeVisible();
	await observer.screenshot({ path: `${SCREENS}/event-catalog-2-outside.png`, fullPage: true });
	await observer.goto(`/events/${eventId}`);
	await expect(observer.getByTestId('outside-claims').getByTestId('outside-claim')).toContainText(galaxyName);

	// Switching back (again confirmed) restores the ranking with the claim in it.
	await coordinator.getByTestId('event-catalog-back').click();
	await expect(coordinator.getByTestId('confirm-catalog')).toBeVisible({ timeout: 15_000 });
	await coordinator.getByRole('button', { name: 'Yes, switch and re-rank' }).click();
	await expect(coordinator.getByTestId('event-catalog-current')).toHaveAttribute('data-catalog-id', catalogBefore!, { timeout: 15_000 });
	await expect(async () => {
		await coordinator.reload();
		await expect(coordinator.locator('[data-testid="galaxy-row"][data-rank="1"]').getByTestId('claim-state')).toHaveText('claimed', { timeout: 2000 });
	}).toPass({ timeout: 60_000 });
	await expect(coordinator.locator('[data-testid="galaxy-row"][data-rank="1"] td').nth(1)).toHaveText(galaxyName);
	await expect(coordinator.getByTestId('outside-claims')).toHaveCount(0);
	await coordinator.screenshot({ path: `${SCREENS}/event-catalog-3-back.png`, fullPage: true });
});
