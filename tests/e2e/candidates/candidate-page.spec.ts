import { test, expect, type Browser, type Page } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import Database from 'better-sqlite3';
import { signIn, signInAs } from '../support/people';
import { DEMO_PEOPLE } from '../../../seeds/scenario';
import { nightPeak, publishNightEvent } from '../support/events';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

const SOURCE_ID = 'SX30120201';
const VERDICT = 'kilonova-like';

async function personPage(browser: Browser, email: string, width = 1280): Promise<Page> {
	const person = DEMO_PEOPLE.find((p) => p.email === email)!;
	const page = await (await browser.newContext({ viewport: { width, height: 900 } })).newPage();
	await signIn(page, person.email, person.password);
	return page;
}

let eventId = '';
// Other specs count the candidates on the shared board: remove this spec's event (its candidate goes with it).
test.afterAll(() => {
	if (!eventId) return;
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	sqlite.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	sqlite.close();
});

const iso = (ms: number) => new Date(ms).toISOString().slice(0, 19) + 'Z';

test('an observer reports a candidate and its fading photometry; a spectroscopist takes it, uploads a spectrum and classifies it; the observer sees the classification live', async ({ browser }) => {
	test.setTimeout(150_000);
	const coordinator = await (await browser.newContext()).newPage();
	await signInAs(coordinator, 'coordinator');
	eventId = await publishNightEvent(coordinator, SOURCE_ID);
	await coordinator.context().close();

	// The observer reports a candidate at the map's peak.
	const observer = await personPage(browser, 'observer@strainline.demo');
	await observer.goto(`/events/${eventId}/candidates`);
	await expect(observer.locator('[data-hydrated="yes"]')).toBeVisible();
	const peak = nightPeak();
	const now = Date.now();
	const formA = observer.getByTestId('candidate-form');
	await formA.getByLabel('Name').fill('AT-page-1');
	await formA.getByLabel('RA (deg, J2000)').fill(peak.raDeg.toFixed(5));
	await formA.getByLabel('Dec (deg, J2000)').fill(peak.decDeg.toFixed(5));
	await formA.getByLabel('Discovered (UTC)').fill(iso(now - 20 * 60_000));
	await formA.getByLabel('Magnitude (AB)').fill('20.0');
	await formA.getByLabel('Magnitude error (optional)').fill('0.05');
	await formA.getByLabel('Filter').fill('r');
	await formA.getByRole('button', { name: 'Report candidate' }).click();
	await expect(observer.getByTestId('candidate-ok')).toBeVisible();
	await observer.getByTestId('candidate-link').filter({ hasText: 'AT-page-1' }).click();
	await expect(observer.getByTestId('candidate-name')).toHaveText('AT-page-1');
	await expect(observer.locator('[data-hydrated="yes"]')).toBeVisible();

	// Photometry since the merger (30 min before the event was published): r and g fade fast, g faster (reddening);
	// at the map's ~118 Mpc (distance modulus ≈ 35.4) they are near absolute magnitude −15, within the kilonova range.
	const merger = Date.parse((await observer.getByTestId('merger-time').getAttribute('data-merger'))!);
	expect(Number.isFinite(merger)).toBe(true);
	const at = (minutes: number) => iso(merger + minutes * 60_000);
	const csv = [
		'time,filter,mag,mag_err,limit',
		`${at(2)},i,,,20.5`,
		`${at(8)},r,20.00,0.03,`,
		`${at(9)},g,19.80,0.03,`,
		`${at(16)},r,20.25,0.03,`,
		`${at(17)},g,20.15,0.03,`,
		`${at(24)},r,20.50,0.03,`,
		`${at(25)},g,20.50,0.03,`
	].join('\n');
	await observer.locator('#phot-csv').fill(csv);
	await observer.getByRole('button', { name: 'Add measurements' }).click();
	await expect(observer.getByTestId('photometry-ok')).toContainText('7');
	await expect(observer.getByTestId('photometry-count')).toHaveText('7');
	await expect(observer.getByTestId('light-curve-chart').locator('canvas')).toHaveCount(1);
	await expect(observer.getByTestId('candidate-verdict')).toHaveText(VERDICT);
	await expect(observer.getByTestId('rule-row')).toHaveCount(5);
	await expect(observer.locator('[data-rule="fastFade"] td').nth(1)).toHaveText('met');
	await expect(observer.getByTestId('vet-credible')).toContainText('credible region');
	// The observer may not take it or classify it.
	await expect(observer.getByTestId('take-form')).toHaveCount(0);
	await expect(observer.getByTestId('classify-form')).toHaveCount(0);
	// Only a live update can show the classification from now on: the marker survives only without a navigation.
	await observer.evaluate(() => ((window as unknown as { stillHere: boolean }).stillHere = true));

	// The spectroscopist takes it, uploads a spectrum and classifies it.
	const spectro = await personPage(browser, 'spectro@strainline.demo');
	const spectroName = DEMO_PEOPLE.find((p) => p.email === 'spectro@strainline.demo')!.name;
	await spectro.goto(`/events/${eventId}/candidates/AT-page-1`);
	await expect(spectro.locator('[data-hydrated="yes"]')).toBeVisible();
	await spectro.getByLabel('Note (optional)').first().fill('long-slit tonight');
	await spectro.getByRole('button', { name: 'I’ll get a spectrum' }).click();
	await expect(spectro.getByTestId('take-status')).toContainText(spectroName);
	await expect(observer.getByTestId('take-status')).toContainText(spectroName);

	// A file that is not a spectrum is refused in words, and nothing is stored.
	await spectro.getByLabel(/Spectrum file/).setInputFiles('tests/fixtures/candidates/spectra/bad-one-column.txt');
	await spectro.getByRole('button', { name: 'Upload spectrum' }).click();
	await expect(spectro.getByTestId('error-file')).toBeVisible();
	await expect(spectro.getByTestId('spectrum-row')).toHaveCount(0);

	await spectro.getByLabel(/Spectrum file/).setInputFiles('tests/fixtures/candidates/spectra/ascii-basic.txt');
	await spectro.getByRole('button', { name: 'Upload spectrum' }).click();
	await expect(spectro.getByTestId('spectrum-ok')).toBeVisible();
	await expect(spectro.getByTestId('spectrum-row')).toHaveCount(1);
	await expect(spectro.getByTestId('spectrum-chart').locator('canvas')).toHaveCount(1);
	// Uploading ended the spectroscopist's take.
	await expect(spectro.getByTestId('take-status')).toContainText('Nobody');

	const cls = spectro.getByTestId('classify-form');
	await cls.getByLabel('What it is').selectOption('kilonova');
	await cls.getByLabel('How sure').selectOption('high');
	await cls.getByLabel('Redshift (optional)').fill('0.026');
	await cls.getByLabel('Notes (optional)').fill('red featureless continuum');
	await cls.getByRole('button', { name: 'Classify' }).click();
	await expect(spectro.getByTestId('classification-row')).toHaveCount(1);
	await expect(spectro.getByTestId('classification-row')).toContainText('kilonova');

	// The observer's page shows it without a reload.
	await expect(observer.getByTestId('classification-row')).toContainText('kilonova', { timeout: 5_000 });
	await expect(observer.getByTestId('spectrum-row')).toHaveCount(1);
	expect(await observer.evaluate(() => (window as unknown as { stillHere?: boolean }).stillHere)).toBe(true);

	await spectro.screenshot({ path: `${SCREENS}/candidate-page-1280.png`, fullPage: true });
	await spectro.setViewportSize({ width: 390, height: 844 });
	await expect(spectro.getByTestId('light-curve-chart').locator('canvas')).toHaveCount(1);
	await spectro.waitForTimeout(300);
	await spectro.screenshot({ path: `${SCREENS}/candidate-page-390.png`, fullPage: true });

	// The event's list shows the verdict and links to the page.
	await observer.goto(`/events/${eventId}/candidates`);
	await expect(observer.getByTestId('candidate-verdict-cell')).toContainText(VERDICT);
	await observer.getByLabel('waiting for a spectrum').check();
	await expect(observer.getByTestId('candidate-row')).toHaveCount(0);
	await observer.context().close();
	await spectro.context().close();
});
