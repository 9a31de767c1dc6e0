import { test, expect } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import { signInAs } from '../support/people';
import { publishStep, waitForSubscriber } from '../support/broker';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

/** The neutron-star scenario's event (fake-alert-broker/scenarios/bns.json). */
const BNS = 'SX30041207';

test('the event page shows the sky view: map, 50%/90% contours, grid in hours, legend and text summary', async ({ page }) => {
	test.setTimeout(90_000);
	await waitForSubscriber();
	await signInAs(page, 'duty');
	await publishStep('bns', 1);
	const card = page.locator(`[data-testid="board-event"][data-source-id="${BNS}"]`);
	await expect(card.getByTestId('area90')).toContainText('deg²', { timeout: 30_000 });
	await card.getByTestId('event-link').click();
	await expect(page.getByTestId('event-page')).toBeVisible();

	const sky = page.getByTestId('sky-view');
	await expect(sky.getByTestId('sky-map')).toHaveAttribute('data-ready', 'true', { timeout: 15_000 });
	await expect(sky.locator('.leaflet-container')).toBeVisible();
	// The probability raster and both contour levels, drawn as SVG paths.
	await expect(sky.locator('img.sky-raster')).toHaveCount(1);
	expect(await sky.locator('path.sky-contour-50').count()).toBeGreaterThan(0);
	expect(await sky.locator('path.sky-contour-90').count()).toBeGreaterThan(0);
	expect(await sky.locator('path.sky-galactic-plane').count()).toBeGreaterThan(0);
	await expect(sky.locator('.sky-sun')).not.toHaveCount(0);
	await expect(sky.locator('.sky-moon')).not.toHaveCount(0);
	// The view opens on the region (the outer contour fills the map); "Whole sky" shows it all, smaller.
	const outer = sky.locator('path.sky-contour-90').first();
	// The first view is set without animation; let leaflet finish laying out before measuring.
	await page.waitForTimeout(300);
	const opened = (await outer.boundingBox())!;
	await sky.getByRole('button', { name: 'Whole sky' }).click();
	await expect(async () => expect((await outer.boundingBox())!.width).toBeLessThan(opened.width / 2)).toPass({ timeout: 3000 });
	await page.waitForTimeout(400);
	// RA labels in hours; on the whole-sky view 12h lies left of 6h (RA increases to the left).
	const labels = sky.locator('.sky-grid-label-ra');
	await expect(labels.filter({ hasText: /^12h$/ })).toHaveCount(1);
	const x12 = (await labels.filter({ hasText: /^12h$/ }).boundingBox())!.x;
	const x6 = (await labels.filter({ hasText: /^6h$/ }).boundingBox())!.x;
	expect(x12).toBeLessThan(x6);

	await expect(sky.getByTestId('sky-legend')).toContainText('50% region');
	await expect(sky.getByTestId('sky-legend')).toContainText('90% region');
	await expect(sky.getByTestId('sky-legend')).toContainText('Galactic plane');
	await expect(sky.getByTestId('sky-summary')).toContainText('50% and 90% credible contours');
	await expect(sky.getByTestId('sky-summary')).toContainText('Sun at RA');

	await sky.getByTestId('sky-map').screenshot({ path: `${SCREENS}/sky-view-1-whole-sky.png` });

	// Zoom in on the 50% contour with the wheel, then hover its middle: the readout gives the credible level there.
	const contour = sky.locator('path.sky-contour-50').first();
	let box = (await contour.boundingBox())!;
	await page.mouse.move(box.x + box.width / 2, box.y + box.height / 2);
	await page.mouse.wheel(0, -150);
	await page.waitForTimeout(900);
	box = (await contour.boundingBox())!;
	await page.mouse.move(box.x + box.width / 2, box.y + box.height / 2);
	const readout = await sky.getByTestId('sky-readout').innerText();
	const level = /inside the (\d+)% credible region/.exec(readout);
	expect(level, readout).not.toBeNull();
	expect(Number(level![1])).toBeLessThanOrEqual(60);
	await page.screenshot({ path: `${SCREENS}/sky-view-2-event-page.png`, fullPage: true });
	await page.mouse.wheel(0, -150);
	await page.waitForTimeout(900);
	await sky.getByTestId('sky-map').screenshot({ path: `${SCREENS}/sky-view-3-zoomed.png` });
});
