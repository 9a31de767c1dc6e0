import { test, expect, type Browser, type Page } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import { signIn } from '../support/people';
import { DEMO_PEOPLE } from '../../../seeds/scenario';
import { publishNightEvent } from '../support/events';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

const SOURCE_ID = 'SX30061801';

async function person(browser: Browser, email: string): Promise<Page> {
	const p = DEMO_PEOPLE.find((x) => x.email === email)!;
	const page = await (await browser.newContext({ viewport: { width: 1400, height: 1000 } })).newPage();
	await signIn(page, p.email, p.password);
	return page;
}

async function openTargets(page: Page, eventId: string, query = '') {
	await page.goto(`/events/${eventId}/targets${query}`);
	const rows = page.getByTestId('galaxy-row');
	await expect(async () => {
		if ((await rows.count()) === 0) await page.reload();
		await expect(rows.first()).toBeVisible({ timeout: 2000 });
	}).toPass({ timeout: 30_000 });
	await expect(page.locator('[data-hydrated="yes"]')).toBeVisible();
}

/** "123 stored" or "12 of 123 match" → [matching, stored]. */
async function counts(page: Page): Promise<[number, number]> {
	const text = (await page.getByTestId('galaxy-total').innerText()).replace(/,/g, '');
	const match = /^(\d+) of (\d+) match$/.exec(text.trim());
	if (match) return [Number(match[1]), Number(match[2])];
	const stored = /^(\d+) stored$/.exec(text.trim());
	if (!stored) throw new Error(`unexpected count "${text}"`);
	return [Number(stored[1]), Number(stored[1])];
}

test('filters on the ranked galaxies follow claims; a coordinator reassigns a claim and sets the lapse time', async ({ browser }) => {
	test.setTimeout(150_000);
	const coordinator = await person(browser, 'coordinator@strainline.demo');
	const eventId = await publishNightEvent(coordinator, SOURCE_ID);

	// An observer of Altiplano Nightwatch claims the top galaxy.
	const observer = await person(browser, 'observer@strainline.demo');
	await openTargets(observer, eventId);
	const [before, stored] = await counts(observer);
	expect(before).toBe(stored);
	expect(stored).toBeGreaterThan(1);
	const top = observer.locator('[data-testid="galaxy-row"][data-rank="1"]');
	const topName = await top.locator('td').nth(1).innerText();
	await top.getByRole('button', { name: /^Claim / }).click();
	await expect(top.getByTestId('claim-state')).toHaveText('claimed');
	// Probabilities print as plain percentages (no exponents) at any size.
	for (const cell of await observer.getByTestId('galaxies-table').locator('td.num').allInnerTexts()) expect(cell).not.toMatch(/\de[-+]\d/);

	// "Unclaimed": the claimed galaxy leaves the list and the count drops by one.
	await observer.getByLabel('Unclaimed').check();
	await expect(observer).toHaveURL(/claim=unclaimed/);
	await expect(observer.getByTestId('galaxy-total')).toHaveText(`${(stored - 1).toLocaleString('en-GB')} of ${stored.toLocaleString('en-GB')} match`);
	await expect(observer.locator('[data-testid="galaxy-row"][data-rank="1"]')).toHaveCount(0);
	await expect(observer.getByTestId('galaxy-row').first()).toHaveAttribute('data-rank', '2');
	await expect(observer.getByLabel('Unclaimed')).toBeFocused();

	// "Claimed by" the observer's team, instead: just the one row.
	await observer.getByLabel('Unclaimed').uncheck();
	await observer.getByTestId('filter-team').selectOption({ label: 'Altiplano Nightwatch' });
	await expect(observer).toHaveURL(/team=/);
	await expect(observer.getByTestId('galaxy-total')).toHaveText(`1 of ${stored.toLocaleString('en-GB')} match`);
	await expect(observer.getByTestId('galaxy-row')).toHaveCount(1);
	await expect(observer.getByTestId('galaxy-row').first()).toContainText(topName);
	await observer.screenshot({ path: `${SCREENS}/filters-1-by-team.png`, fullPage: true });

	// Both at once cannot match: the table says why.
	await observer.getByLabel('Unclaimed').check();
	await expect(observer.getByTestId('galaxies-empty')).toHaveText('No galaxy is unclaimed and claimed by Altiplano Nightwatch.');
	await expect(observer.getByTestId('galaxy-total')).toHaveText(`0 of ${stored.toLocaleString('en-GB')} match`);

	// The link is shareable and works as a plain GET (the form carries the other parameters).
	const shared = new URL(observer.url());
	expect(shared.searchParams.get('claim')).toBe('unclaimed');
	// Observers get no coordinator controls.
	await expect(observer.getByTestId('lapse-panel')).toHaveCount(0);
	await expect(observer.getByTestId('reassign-form')).toHaveCount(0);

	// The coordinator opens the team-filtered list and hands the claim to Canaria Deep's telescope.
	const team = shared.searchParams.get('team')!;
	await openTargets(coordinator, eventId, `?team=${team}`);
	const row = coordinator.getByTestId('galaxy-row').first();
	await row.getByRole('combobox', { name: `Reassign ${topName} to` }).selectOption({ label: 'Tenaz 2.0 m' });
	await row.getByRole('button', { name: `Reassign ${topName}` }).click();
	// Altiplano no longer holds it: the filtered table empties, and Canaria Deep's filter shows it.
	await expect(coordinator.getByTestId('galaxies-empty')).toHaveText('Altiplano Nightwatch holds no claim on these galaxies.');
	await coordinator.getByTestId('filter-team').selectOption({ label: 'Canaria Deep' });
	await expect(coordinator.getByTestId('galaxy-row')).toHaveCount(1);
	await expect(coordinator.getByTestId('galaxy-row').first().getByTestId('claim-cell')).toContainText('Canaria Deep');
	await expect(coordinator.getByTestId('galaxy-row').first().getByTestId('claim-cell')).toContainText('Tenaz 2.0 m');

	// The lapse time: a bad value is refused with the reason and kept in the input; a good one is shown.
	const lapse = coordinator.getByTestId('lapse-panel');
	await expect(lapse.getByTestId('lapse-current')).toContainText('60 minutes');
	await lapse.getByLabel('Lapse time (minutes)').fill('3');
	await lapse.getByRole('button', { name: 'Set' }).click();
	await expect(lapse.getByTestId('error-lapseMinutes')).toHaveText('Enter whole minutes from 5 to 1440 (24 h).');
	await expect(lapse.getByLabel('Lapse time (minutes)')).toHaveValue('3');
	await expect(lapse.getByTestId('lapse-current')).toContainText('60 minutes');
	await coordinator.screenshot({ path: `${SCREENS}/filters-2-lapse-error.png`, fullPage: true });
	await lapse.getByLabel('Lapse time (minutes)').fill('90');
	await lapse.getByRole('button', { name: 'Set' }).click();
	await expect(lapse.getByTestId('lapse-current')).toContainText('90 minutes');
	await expect(lapse.getByTestId('error-lapseMinutes')).toHaveCount(0);

	// The observer's page heard about the reassignment: unfiltered, the top galaxy is Canaria Deep's now.
	await observer.goto(`/events/${eventId}/targets`);
	await expect(observer.locator('[data-testid="galaxy-row"][data-rank="1"]').getByTestId('claim-cell')).toContainText('Canaria Deep');
	await expect(observer.locator('[data-testid="galaxy-row"][data-rank="1"]').getByRole('button', { name: /^(Start|Done|Release) / })).toHaveCount(0);

	// "Observable now" for the chosen telescope: the count is the server's, every listed row is up now.
	await observer.getByLabel(/Observable now/).check();
	await expect(observer).toHaveURL(/observable=now/);
	const [up] = await counts(observer);
	if (up > 0) {
		// The "Tonight" cell, found by its name: a column added before it (Distance fit) made a
		// position point at the airmass, which only showed when galaxies were up during the run.
		for (const text of await observer.getByTestId('galaxy-row').getByTestId('tonight').allInnerTexts()) expect(text).toContain('up now');
	} else {
		await expect(observer.getByTestId('galaxies-empty')).toHaveText(/right now|not dark/);
	}
	await observer.screenshot({ path: `${SCREENS}/filters-3-observable.png`, fullPage: true });

	// Without JavaScript the same form submits by GET and keeps the sorting.
	const context = await browser.newContext({ javaScriptEnabled: false });
	const plain = await context.newPage();
	const viewer = DEMO_PEOPLE.find((x) => x.roles.includes('viewer'))!;
	await plain.goto('/sign-in');
	await plain.getByLabel('E-mail').fill(viewer.email);
	await plain.getByLabel('Password').fill(viewer.password);
	await plain.getByRole('button', { name: 'Sign in' }).click();
	await expect(plain).toHaveURL(/\/$/);
	await plain.goto(`/events/${eventId}/targets?sort=distance`);
	await plain.getByLabel('Unclaimed').check();
	await plain.getByRole('button', { name: 'Apply' }).click();
	await expect(plain).toHaveURL(/claim=unclaimed/);
	await expect(plain).toHaveURL(/sort=distance/);
	await expect(plain.getByTestId('galaxy-total')).toHaveText(`${(stored - 1).toLocaleString('en-GB')} of ${stored.toLocaleString('en-GB')} match`);
	await context.close();
});
