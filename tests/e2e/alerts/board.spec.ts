import { test, expect, type Locator, type Page } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import { signInAs } from '../support/people';
import { publishStep, waitForSubscriber } from '../support/broker';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

/** The neutron-star scenario's event and the retracted one (fake-alert-broker/scenarios/*.json). */
const BNS = 'SX30041207';
const RETRACTED = 'SX30041315';

const card = (page: Page, sourceId: string) => page.locator(`[data-testid="board-event"][data-source-id="${sourceId}"]`);

async function numbers(c: Locator) {
	return { area90: await c.getByTestId('area90').innerText(), distance: await c.getByTestId('distance').innerText() };
}

test('the duty scientist follows a neutron-star merger live: paged, acknowledges, sees the update and a retraction', async ({ page, browser }) => {
	test.setTimeout(150_000);
	await waitForSubscriber();
	const duty = await signInAs(page, 'duty');
	await expect(page.getByTestId('live-status')).toHaveAttribute('data-status', 'live');
	await expect(page.getByTestId('board-empty')).toBeVisible();
	await expect(page.getByTestId('on-shift')).toContainText(duty.name);
	// A marker that a reload would wipe: the whole story must arrive without one.
	await page.evaluate(() => ((window as unknown as { boardMarker: string }).boardMarker = 'still-here'));

	// Preliminary notice: the event appears by itself, with the preliminary banner.
	expect((await publishStep('bns', 0)).acked).toBe(1);
	const bns = card(page, BNS);
	await expect(bns).toBeVisible({ timeout: 30_000 });
	await expect(bns.getByTestId('preliminary-banner')).toContainText('preliminary: automated, may be retracted or revised', { ignoreCase: true });
	await expect(bns.getByTestId('kind-badge').first()).toHaveAttribute('data-kind', 'preliminary');
	await expect(bns.getByTestId('source-class')).toContainText('BNS 93%');
	// 0.08 per yr in the scenario.
	await expect(bns.getByTestId('far')).toContainText('0.08 per yr');
	await expect(bns.getByTestId('area90')).toContainText('deg²', { timeout: 30_000 });
	await expect(bns.getByTestId('ack')).toHaveAttribute('data-ack', 'open', { timeout: 15_000 });
	await expect(bns.getByTestId('ack')).toContainText(duty.name);
	await expect(page.getByText('Alerts can be retracted.')).toBeVisible();
	const preliminary = await numbers(bns);
	await page.screenshot({ path: `${SCREENS}/board-1-preliminary.png`, fullPage: true });

	// The page e-mail reached the fake SMTP server: the development mailbox (administrators only) shows it.
	const adminContext = await browser.newContext();
	const adminPage = await adminContext.newPage();
	await signInAs(adminPage, 'admin');
	await adminPage.goto('/mailbox');
	const mail = adminPage.getByTestId('mail').filter({ hasText: `to ${duty.email}` }).filter({ hasText: BNS });
	await expect(mail.first()).toBeVisible();
	await expect(mail.first()).toContainText(`${BNS} preliminary · FAR 0.08 per yr`);
	await expect(mail.first()).toContainText(`BNS 93% NSBH 4% · 90% ${preliminary.area90} · ${preliminary.distance}`);
	await expect(mail.first()).toContainText('/events/');
	await adminPage.screenshot({ path: `${SCREENS}/board-2-mailbox.png`, fullPage: true });
	await adminContext.close();

	// Initial notice: the sharper map replaces the broad one.
	await publishStep('bns', 1);
	await expect(bns.getByTestId('kind-badge').first()).toHaveAttribute('data-kind', 'initial', { timeout: 30_000 });
	await expect(bns.getByTestId('preliminary-banner')).toHaveCount(0);
	await expect.poll(async () => (await numbers(bns)).area90, { timeout: 30_000 }).not.toBe(preliminary.area90);

	// Acknowledge on the board.
	await bns.getByRole('button', { name: `Acknowledge ${BNS}` }).click();
	await expect(bns.getByTestId('ack')).toHaveAttribute('data-ack', 'acknowledged');
	await expect(bns.getByTestId('ack')).toContainText(`Acknowledged by ${duty.name}`);
	const initial = await numbers(bns);

	// Update: a tight map and a closer distance (118 ± 24 Mpc in the scenario, before the map's own sampling).
	await publishStep('bns', 2);
	await expect(bns.getByTestId('kind-badge').first()).toHaveAttribute('data-kind', 'update', { timeout: 30_000 });
	await expect.poll(async () => (await numbers(bns)).area90, { timeout: 30_000 }).not.toBe(initial.area90);
	await expect.poll(async () => (await numbers(bns)).distance).not.toBe(initial.distance);
	const update = await numbers(bns);
	expect(parseFloat(update.area90.replace(/,/g, ''))).toBeLessThan(parseFloat(initial.area90.replace(/,/g, '')));
	expect(parseFloat(update.distance)).toBeLessThan(parseFloat(initial.distance));
	await expect(bns.getByTestId('history-item')).toHaveCount(3);
	await page.screenshot({ path: `${SCREENS}/board-3-update.png`, fullPage: true });

	// A second candidate, then its retraction: a red banner on that event only.
	await publishStep('retraction', 0);
	const retracted = card(page, RETRACTED);
	await expect(retracted).toBeVisible({ timeout: 30_000 });
	await publishStep('retraction', 1);
	await expect(retracted.getByTestId('retraction-banner')).toBeVisible({ timeout: 30_000 });
	await expect(retracted.getByTestId('retraction-banner')).toContainText('Retracted');
	await expect(retracted.getByTestId('retraction-banner')).toContainText('Stop follow-up observations');
	await expect(retracted).toHaveAttribute('data-state', 'retracted');
	await expect(bns.getByTestId('retraction-banner')).toHaveCount(0);
	// A retracted event leaves "Active events" for the stood-down section, with the source's reason and its clock stopped.
	await expect(page.getByTestId('stood-down').locator(`[data-source-id="${RETRACTED}"]`)).toBeVisible();
	await expect(page.getByTestId('board-events').getByTestId('board-event')).toHaveCount(1);
	await expect(page.getByTestId('board-events').getByTestId('board-event').first()).toHaveAttribute('data-source-id', BNS);
	await expect(retracted.getByTestId('retraction-reason')).toContainText('consistent with an instrumental artefact');
	await expect(retracted.getByTestId('since-merger')).toHaveAttribute('data-stopped', 'yes');
	await page.screenshot({ path: `${SCREENS}/board-4-retraction.png`, fullPage: true });

	expect(await page.evaluate(() => (window as unknown as { boardMarker?: string }).boardMarker)).toBe('still-here');

	// The event page sums up what is known.
	await bns.getByTestId('event-link').click();
	await expect(page.getByTestId('event-page')).toBeVisible();
	await expect(page.getByTestId('timeline-item')).toHaveCount(3);
	await expect(page.getByTestId('area90')).toHaveText(update.area90);
	await expect(page.getByTestId('distance')).toHaveText(update.distance);
	await expect(page.getByTestId('peak')).toContainText('RA');
	await expect(page.getByTestId('pages')).toContainText(duty.name);
	await expect(page.getByTestId('pages')).toContainText(`acknowledged by ${duty.name}`);
	await page.screenshot({ path: `${SCREENS}/event-page.png`, fullPage: true });
});
