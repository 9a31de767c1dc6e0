import { test, expect, type Page } from '@playwright/test';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import Database from 'better-sqlite3';
import { signInAs } from '../support/people';
import { generateSkymap, skymapToFits } from '../../../fake-alert-broker/skymap';
import { sunPosition } from '../../../src/lib/targeting/sun-moon';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });
const WORK = 'test-results/targets-e2e';
mkdirSync(WORK, { recursive: true });

// The imported catalogue would otherwise stay the one new events are ranked against, and later
// specs place events where its 30 galaxies are not: remove it (its galaxies go with it).
test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	sqlite.prepare('DELETE FROM catalog WHERE name = ?').run('Browser-test galaxies');
	sqlite.close();
});

/** How many telescopes the network has now, read from the telescopes page in another tab. */
async function telescopeCount(page: Page): Promise<number> {
	const tab = await page.context().newPage();
	await tab.goto('/telescopes');
	const n = await tab.getByTestId('telescopes-table').locator('tbody tr').count();
	await tab.close();
	return n;
}

/** An event of our own (not one of the broker's scenarios). */
const SOURCE_ID = 'SX30049901';
/**
 * Its sky map: a 1.2° blob at 118 ± 24 Mpc opposite the Sun today, on the equator, so that it is
 * up at night at the demo sites whatever the date the test runs (the plan then has lists to show).
 */
const PEAK = { raDeg: (sunPosition({ latitudeDeg: 0, longitudeDeg: 0, elevationM: 0 }, new Date()).raDeg + 180) % 360, decDeg: 0 };
function skymapFile(): string {
	const fits = skymapToFits(generateSkymap({ components: [{ ...PEAK, widthDeg: 1.2 }], distance: { meanMpc: 118, stdMpc: 24 } }), {
		object: SOURCE_ID,
		dateObs: new Date().toISOString().slice(0, 23)
	});
	const path = `${WORK}/skymap.multiorder.fits.gz`;
	writeFileSync(path, fits);
	return path;
}

/**
 * A small invented catalogue with unusual column names (so the mapping step matters): 30 galaxies
 * within a degree of the map's peak at 90–150 Mpc, the brightest nearest the peak, and two bad rows.
 */
function smallCatalogue(): { path: string; badLines: number[] } {
	const lines = ['# invented galaxies for a browser test', 'GalaxyName,RAJ2000,DEJ2000,Dist_Mpc,eDist,Bmag_abs'];
	const badLines: number[] = [];
	for (let k = 0; k < 30; k++) {
		const ra = (PEAK.raDeg + 0.8 * Math.cos(k * 2.4) * (k / 30) + 360) % 360;
		const dec = PEAK.decDeg + 0.8 * Math.sin(k * 2.4) * (k / 30);
		lines.push(`E2E-GAL-${String(k + 1).padStart(2, '0')},${ra.toFixed(5)},${dec.toFixed(5)},${(100 + k).toFixed(1)},12,${(-21 + k * 0.05).toFixed(2)}`);
		if (k === 9) {
			lines.push('E2E-BAD-RA,400,0,110,10,-20');
			badLines.push(lines.length);
		}
		if (k === 19) {
			lines.push(`E2E-BAD-DIST,${PEAK.raDeg.toFixed(3)},0,far,10,-20`);
			badLines.push(lines.length);
		}
	}
	const path = `${WORK}/small-catalogue.csv`;
	writeFileSync(path, lines.join('\n') + '\n');
	return { path, badLines };
}

function noticeXml(): string {
	return readFileSync('tests/fixtures/notices/bns-initial.xml', 'utf8').replaceAll('SX30041207', SOURCE_ID);
}

test('a coordinator imports a catalogue through the mapping step, then an event shows ranked galaxies and a network plan', async ({ page }) => {
	test.setTimeout(120_000);
	const { path, badLines } = smallCatalogue();
	await signInAs(page, 'coordinator');

	// The list shows the demo's synthetic catalogue, labelled as such.
	await page.getByRole('link', { name: 'Catalogues' }).click();
	await expect(page.getByRole('heading', { name: 'Galaxy catalogues' })).toBeVisible();
	await expect(page.getByTestId('catalog-row').first().getByTestId('synthetic-badge')).toBeVisible();
	await page.getByRole('link', { name: 'Import a catalogue' }).click();

	// Choosing the file reads its header; the columns are then mapped by hand.
	await page.getByTestId('catalog-file').setInputFiles(path);
	await expect(page.getByTestId('mapping')).toContainText('GalaxyName, RAJ2000, DEJ2000, Dist_Mpc, eDist, Bmag_abs');
	await page.getByLabel('Galaxy name').selectOption('GalaxyName');
	await page.getByLabel('RA (degrees, J2000)').selectOption('RAJ2000');
	await page.getByLabel('Dec (degrees, J2000)').selectOption('DEJ2000');
	await page.getByLabel('Distance (Mpc)').selectOption('Dist_Mpc');
	await page.getByLabel('Distance error (Mpc, 1σ)').selectOption('eDist');
	await page.getByLabel('Luminosity proxy').selectOption('b_abs');
	await page.getByLabel('Proxy column').selectOption('Bmag_abs');
	await page.getByLabel('Catalogue name').fill('Browser-test galaxies');
	await page.getByLabel('Invented galaxies (synthetic catalogue)').check();

	// All or nothing: two bad rows stop the import, with their lines.
	await page.getByRole('button', { name: 'Import' }).click();
	const result = page.getByTestId('import-result');
	await expect(result).toHaveAttribute('data-state', 'failed', { timeout: 30_000 });
	await expect(result.getByTestId('import-summary')).toContainText('Nothing was stored: 2 of 32 rows were rejected');
	await expect(result.getByTestId('rejected-count')).toHaveText('2');
	const rejected = result.getByTestId('rejected-rows').locator('tbody tr');
	await expect(rejected).toHaveCount(2);
	await expect(rejected.nth(0)).toContainText(String(badLines[0]));
	await expect(rejected.nth(0)).toContainText('ra "400" is not a number in [0, 360]');
	await expect(rejected.nth(1)).toContainText(String(badLines[1]));
	await expect(rejected.nth(1)).toContainText('distance "far"');
	await page.screenshot({ path: `${SCREENS}/targets-1-import-refused.png`, fullPage: true });

	// Keeping the valid rows stores the 30 galaxies and still lists the rejected ones.
	await page.getByTestId('skip-invalid').check();
	await page.getByRole('button', { name: 'Import' }).click();
	await expect(result).toHaveAttribute('data-state', 'ready', { timeout: 30_000 });
	await expect(result.getByTestId('import-summary')).toContainText('Stored 30 galaxies of 32 rows read. 2 rejected rows were left out.');
	await expect(rejected).toHaveCount(2);
	await page.screenshot({ path: `${SCREENS}/targets-2-import-stored.png`, fullPage: true });
	await page.goto('/catalogs');
	const mine = page.locator('[data-testid="catalog-row"][data-state="ready"]').filter({ hasText: 'Browser-test galaxies' });
	await expect(mine).toHaveCount(1);
	await expect(mine).toContainText('in use');
	await expect(mine).toContainText('B-band luminosity');

	// An event with a sky map, uploaded by hand.
	await page.goto('/events/upload');
	// Typing before hydration can be lost when the page hydrates under load: wait for it.
	await expect(page.locator('[data-hydrated="yes"]')).toBeVisible();
	await page.getByLabel('Notice XML').fill(noticeXml());
	await page.getByLabel('Sky map (optional)').setInputFiles(skymapFile());
	await page.getByRole('button', { name: 'Submit the notice' }).click();
	await expect(page.getByTestId('event-page')).toBeVisible({ timeout: 30_000 });
	await page.getByTestId('event-links').getByRole('link', { name: 'Targets' }).click();

	// Ranked galaxies: ours, best near the peak, with normalised and cumulative probability.
	await expect(page.getByTestId('targets-page')).toBeVisible();
	const rows = page.getByTestId('galaxy-row');
	await expect(async () => {
		if ((await rows.count()) === 0) await page.reload();
		await expect(rows.first()).toBeVisible({ timeout: 2000 });
	}).toPass({ timeout: 30_000 });
	await expect(page.getByTestId('ranking-summary')).toContainText('Browser-test galaxies');
	await expect(page.getByTestId('ranking-summary').getByTestId('synthetic-badge')).toBeVisible();
	await expect(rows.first()).toContainText('E2E-GAL-');
	const count = await rows.count();
	expect(count).toBeGreaterThan(5);
	expect(count).toBeLessThanOrEqual(25);
	const cumulative = Number((await rows.last().locator('td').nth(6).innerText()).replace('%', ''));
	expect(cumulative).toBeGreaterThan(50);
	// Every telescope of the network (the demo's seven, plus any an earlier test added).
	await expect(page.getByTestId('telescope-row').first()).toBeVisible();
	expect(await page.getByTestId('telescope-row').count()).toBe(await telescopeCount(page));
	await expect(page.getByTestId('telescope-row').first().getByTestId('depth')).toContainText(/deep enough|marginal|too shallow/);
	await page.screenshot({ path: `${SCREENS}/targets-3-ranked.png`, fullPage: true });

	// The same ranking through the JSON API.
	const eventId = new URL(page.url()).pathname.split('/')[2];
	const api = await page.request.get(`/api/v1/events/${eventId}/galaxies?limit=3`);
	expect(api.status()).toBe(200);
	const body = (await api.json()) as { galaxies: Record<string, unknown>[] };
	expect(body.galaxies).toHaveLength(3);
	expect(Object.keys(body.galaxies[0]).sort()).toEqual(['cumulative', 'dec', 'distance', 'galaxyId', 'name', 'probability', 'ra', 'rank', 'score']);
	expect(body.galaxies[0]).toMatchObject({ rank: 1, name: await rows.first().locator('td').nth(1).innerText() });
	const fields = (await (await page.request.get(`/api/v1/events/${eventId}/fields`)).json()) as { fields: { telescopeId: string }[] };
	expect(fields.fields.length).toBeGreaterThan(0);
	expect((await page.request.get(`/api/v1/events/${eventId}/galaxies?limit=0`)).status()).toBe(400);

	// Sorting happens on the server: by distance, ascending.
	await page.getByRole('link', { name: /^Distance/ }).click();
	await expect(page).toHaveURL(/sort=distance/);
	const first = await rows.nth(0).locator('td').nth(4).innerText();
	const second = await rows.nth(1).locator('td').nth(4).innerText();
	expect(parseFloat(first)).toBeLessThanOrEqual(parseFloat(second));

	// The plan: one observing list per telescope, the coverage chart, a CSV download.
	await page.getByRole('link', { name: 'Plan' }).first().click();
	await expect(page.getByTestId('plan-page')).toBeVisible();
	// Every telescope of the network (the demo's seven, plus any an earlier test added).
	await expect(page.getByTestId('plan-telescope').first()).toBeVisible();
	expect(await page.getByTestId('plan-telescope').count()).toBe(await telescopeCount(page));
	// Opposite the Sun, the blob is up at night somewhere in the network within 24 h.
	await expect(page.getByTestId('plan-row').first()).toBeVisible();
	await expect(page.getByTestId('coverage-chart')).toHaveAttribute('data-ready', 'yes');
	await page.screenshot({ path: `${SCREENS}/targets-4-plan.png`, fullPage: true });
	const downloadPromise = page.waitForEvent('download');
	const withRows = page.getByTestId('plan-telescope').filter({ has: page.getByTestId('plan-row') }).first();
	await withRows.getByTestId('download-csv').click();
	const download = await downloadPromise;
	expect(download.suggestedFilename()).toMatch(new RegExp(`^${SOURCE_ID}-.+-plan\\.csv$`));
	const csv = readFileSync((await download.path())!, 'utf8');
	expect(csv.split('\r\n')[0]).toBe(
		'order,target_id,name,kind,ra_deg,dec_deg,ra_hms,dec_dms,start_utc,end_utc,exposure_s,filter,epoch,airmass_start,altitude_start_deg,moon_separation_deg,probability,cumulative_probability'
	);
	const listed = await withRows.getByTestId('plan-row').count();
	expect(listed).toBeGreaterThan(0);
	const csvRows = csv.trim().split('\r\n').length - 1;
	expect(csvRows).toBeGreaterThanOrEqual(listed);

	// Claiming from the plan: the first planned target of that telescope; the plan is redone with the claim held.
	const planned = withRows.getByTestId('plan-row').first();
	const target = (await planned.locator('td').nth(2).innerText()).replace('last chance', '').trim();
	await planned.getByRole('button', { name: /^Claim / }).click();
	await expect(withRows.getByRole('status')).toHaveText('Claimed.');
	const row = withRows.getByTestId('plan-row').filter({ hasText: target });
	await expect(row.getByTestId('plan-claim')).toContainText('claimed by');
	// After a reload too: the claim is stored and the plan keeps the target for this telescope.
	await page.reload();
	await expect(row.getByTestId('plan-claim')).toContainText('claimed by');
	await expect(row.getByRole('button', { name: /^Claim / })).toHaveCount(0);
	await page.screenshot({ path: `${SCREENS}/targets-5-plan-claimed.png`, fullPage: true });
});
