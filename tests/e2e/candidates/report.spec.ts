import { test, expect, type Browser, type Page } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import { signIn, signInAs } from '../support/people';
import { DEMO_PEOPLE } from '../../../seeds/scenario';
import { publishNightEvent } from '../support/events';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

const SOURCE_ID = 'SX30090301';

async function personPage(browser: Browser, email: string): Promise<Page> {
	const person = DEMO_PEOPLE.find((p) => p.email === email)!;
	const page = await (await browser.newContext({ viewport: { width: 1360, height: 900 } })).newPage();
	await signIn(page, person.email, person.password);
	return page;
}

test('an observer reports a candidate (a bad magnitude first); another team sees it live, is warned of a near duplicate and refused a taken name', async ({ browser }) => {
	test.setTimeout(120_000);
	const coordinator = await (await browser.newContext()).newPage();
	await signInAs(coordinator, 'coordinator');
	const eventId = await publishNightEvent(coordinator, SOURCE_ID);
	await coordinator.context().close();

	const a = await personPage(browser, 'observer@strainline.demo');
	const b = await personPage(browser, 'observer2@strainline.demo');
	for (const p of [a, b]) {
		await p.goto(`/events/${eventId}/candidates`);
		await expect(p.locator('[data-hydrated="yes"]')).toBeVisible();
		await expect(p.getByTestId('no-candidates')).toBeVisible();
	}
	// B's page must not reload: a marker on its window survives only without a navigation.
	await b.evaluate(() => ((window as unknown as { stillHere: boolean }).stillHere = true));
	// Let B's page join the event's room before A reports.
	await b.waitForTimeout(500);

	const discoveredAt = new Date(Date.now() - 10 * 60_000).toISOString().slice(0, 19) + 'Z';
	const formA = a.getByTestId('candidate-form');
	await formA.getByLabel('Name').fill('AN-0001');
	await formA.getByLabel('RA (deg, J2000)').fill('123.45678');
	await formA.getByLabel('Dec (deg, J2000)').fill('-12.34567');
	await formA.getByLabel('Discovered (UTC)').fill(discoveredAt);
	await formA.getByLabel('Magnitude (AB)').fill('45');
	await formA.getByLabel('Magnitude error (optional)').fill('0.12');
	await formA.getByLabel('Filter').fill('r');
	await formA.getByLabel('Telescope (optional)').selectOption({ label: 'Pardo 0.6 m (Altiplano Nightwatch; g, r, i)' });
	await formA.getByRole('button', { name: 'Report candidate' }).click();
	await expect(a.getByTestId('error-magnitude')).toHaveText('Magnitude (AB) must be from 5 to 30.');
	// Everything typed is still there, the bad value included, so only it needs fixing.
	await expect(formA.getByLabel('Name')).toHaveValue('AN-0001');
	await expect(formA.getByLabel('RA (deg, J2000)')).toHaveValue('123.45678');
	await expect(formA.getByLabel('Dec (deg, J2000)')).toHaveValue('-12.34567');
	await expect(formA.getByLabel('Discovered (UTC)')).toHaveValue(discoveredAt);
	await expect(formA.getByLabel('Magnitude (AB)')).toHaveValue('45');
	await expect(formA.getByLabel('Filter')).toHaveValue('r');
	await expect(formA.getByLabel('Telescope (optional)').locator('option:checked')).toHaveText('Pardo 0.6 m (Altiplano Nightwatch; g, r, i)');
	await expect(a.getByTestId('candidate-row')).toHaveCount(0);
	await a.screenshot({ path: `${SCREENS}/candidates-1-bad-magnitude.png`, fullPage: true });

	await formA.getByLabel('Magnitude (AB)').fill('19.32');
	await formA.getByRole('button', { name: 'Report candidate' }).click();
	await expect(a.getByTestId('candidate-ok')).toHaveText('Candidate AN-0001 reported.');
	await expect(a.getByTestId('candidate-near-warning')).toHaveCount(0);
	const rowA = a.locator('[data-testid="candidate-row"][data-name="AN-0001"]');
	await expect(rowA.getByTestId('candidate-position')).toContainText('123.45678, -12.34567');
	await expect(rowA.getByTestId('candidate-position')).toContainText('08:13:49.63, -12:20:44.4');
	await expect(rowA).toContainText('19.32 ± 0.12');
	await expect(rowA).toContainText('Altiplano Nightwatch · Pardo 0.6 m');

	// B, untouched, sees it appear.
	const rowB = b.locator('[data-testid="candidate-row"][data-name="AN-0001"]');
	await expect(rowB).toBeVisible({ timeout: 3000 });
	await expect(rowB).toContainText(discoveredAt.slice(0, 19).replace('T', ' '));
	expect(await b.evaluate(() => (window as unknown as { stillHere?: boolean }).stillHere)).toBe(true);
	await b.screenshot({ path: `${SCREENS}/candidates-2-seen-live.png`, fullPage: true });

	// B reports its own find 1″ north of A's (no telescope: its only team, a free-text filter): stored, with a warning.
	const formB = b.getByTestId('candidate-form');
	await formB.getByLabel('Name').fill('KW-17');
	await formB.getByLabel('RA (deg, J2000)').fill('123.45678');
	await formB.getByLabel('Dec (deg, J2000)').fill(String(-12.34567 + 1 / 3600));
	await formB.getByLabel('Discovered (UTC)').fill(discoveredAt);
	await formB.getByLabel('Magnitude (AB)').fill('19.5');
	await formB.getByLabel('Filter').fill('r');
	await formB.getByRole('button', { name: 'Report candidate' }).click();
	await expect(b.getByTestId('candidate-ok')).toHaveText('Candidate KW-17 reported.');
	await expect(b.getByTestId('candidate-near-warning')).toHaveText(
		'KW-17 lies 1.00″ from AN-0001 (Altiplano Nightwatch), reported earlier: possibly the same transient.'
	);
	await expect(b.locator('[data-testid="candidate-row"][data-name="KW-17"] [data-testid="candidate-note"]')).toHaveText('Within 1.00″ of AN-0001 (Altiplano Nightwatch)');
	await expect(a.locator('[data-testid="candidate-row"][data-name="KW-17"]')).toBeVisible({ timeout: 3000 });
	await expect(rowA.getByTestId('candidate-note')).toHaveText('Within 1.00″ of KW-17 (Karoo Wide Field)');
	await b.screenshot({ path: `${SCREENS}/candidates-3a-near-warning.png`, fullPage: true });

	// A name already used for the event, in another case, is refused with the holder named; the input stays.
	await formB.getByLabel('Name').fill('an-0001');
	await formB.getByLabel('RA (deg, J2000)').fill('200');
	await formB.getByLabel('Dec (deg, J2000)').fill('10');
	await formB.getByLabel('Discovered (UTC)').fill(discoveredAt);
	await formB.getByLabel('Magnitude (AB)').fill('20.1');
	await formB.getByLabel('Filter').fill('g');
	await formB.getByRole('button', { name: 'Report candidate' }).click();
	await expect(b.getByTestId('candidate-message')).toHaveText('Candidate AN-0001 is already reported for this event by Altiplano Nightwatch.');
	await expect(formB.getByLabel('Name')).toHaveValue('an-0001');
	await expect(b.getByTestId('candidate-row')).toHaveCount(2);
	await b.screenshot({ path: `${SCREENS}/candidates-3b-name-taken.png`, fullPage: true });

	// The API: the same list, and field errors in the API's shape.
	const api = await a.request.get(`/api/v1/events/${eventId}/candidates`);
	expect(api.status()).toBe(200);
	const listed = (await api.json()) as { candidates: { name: string; teamName: string }[] };
	expect(listed.candidates.map((c) => c.name)).toEqual(['KW-17', 'AN-0001']);
	const bad = await a.request.post(`/api/v1/events/${eventId}/candidates`, {
		data: { name: 'AN-0002', raDeg: 400, decDeg: 0, discoveredAt, magnitude: 19, filter: 'r' }
	});
	expect(bad.status()).toBe(422);
	const raRange = 'RA (deg, J2000) must be from 0 up to (not including) 360.';
	expect(await bad.json()).toEqual({ error: { code: 'invalid', message: raRange, details: { raDeg: raRange } } });

	// Every event's candidates, newest first, each linking to its event's page.
	await a.goto('/candidates');
	const all = a.getByTestId('all-candidates').getByTestId('candidate-row');
	await expect(all).toHaveCount(2);
	await expect(all.nth(0)).toHaveAttribute('data-name', 'KW-17');
	await expect(all.nth(1)).toHaveAttribute('data-name', 'AN-0001');
	await expect(all.nth(1)).toContainText(SOURCE_ID);
	await expect(a.getByTestId('candidate-event')).toContainText(`${SOURCE_ID} · 2 candidates`);
	await a.screenshot({ path: `${SCREENS}/candidates-4-all.png`, fullPage: true });
	await all.nth(1).getByRole('link', { name: SOURCE_ID }).click();
	await expect(a).toHaveURL(new RegExp(`/events/${eventId}/candidates$`));
	await expect(a.getByTestId('event-candidates-page')).toBeVisible();

	// The event page: both candidates on the sky view as star markers, with their names on hover, and the link counts them.
	await a.goto(`/events/${eventId}`);
	await expect(a.getByTestId('sky-map')).toHaveAttribute('data-ready', 'true');
	await expect(a.locator('.sky-candidate')).toHaveCount(2);
	await expect(a.getByTestId('sky-summary')).toContainText('2 candidates.');
	await expect(a.getByTestId('event-links')).toContainText('Candidates (2)');
	await a.getByRole('button', { name: 'Whole sky' }).click();
	await a.waitForTimeout(500);
	await a.locator('.sky-candidate').first().hover({ force: true });
	await expect(a.locator('.leaflet-tooltip')).toContainText('Candidate ');
	await a.getByTestId('sky-section').screenshot({ path: `${SCREENS}/candidates-5-sky.png` });
});
