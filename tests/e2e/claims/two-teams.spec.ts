import { test, expect, type Browser, type Page } from '@playwright/test';
import { mkdirSync, writeFileSync } from 'node:fs';
import { signIn, signInAs } from '../support/people';
import { DEMO_PEOPLE } from '../../../seeds/scenario';
import { publishNightEvent } from '../support/events';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });
const WORK = 'test-results/claims-e2e';
mkdirSync(WORK, { recursive: true });

const SOURCE_ID = 'SX30052201';

async function observer(browser: Browser, email: string): Promise<Page> {
	const person = DEMO_PEOPLE.find((p) => p.email === email)!;
	const page = await (await browser.newContext()).newPage();
	await signIn(page, person.email, person.password);
	return page;
}

test('two teams contend for one galaxy: the second sees it taken live and is refused with the holder named', async ({ browser }) => {
	test.setTimeout(120_000);
	// A coordinator publishes the notice with its sky map; the event is then ranked.
	const coordinator = await (await browser.newContext()).newPage();
	await signInAs(coordinator, 'coordinator');
	const eventId = await publishNightEvent(coordinator, SOURCE_ID);
	await coordinator.context().close();

	const a = await observer(browser, 'observer@strainline.demo');
	const b = await observer(browser, 'observer2@strainline.demo');
	for (const p of [a, b]) {
		await p.goto(`/events/${eventId}/targets`);
		const rows = p.getByTestId('galaxy-row');
		await expect(async () => {
			if ((await rows.count()) === 0) await p.reload();
			await expect(rows.first()).toBeVisible({ timeout: 2000 });
		}).toPass({ timeout: 30_000 });
	}
	// Each observer may only claim with their own team's telescopes.
	await expect(a.getByTestId('claim-telescope').locator('option')).not.toHaveCount(0);
	for (const text of await a.getByTestId('claim-telescope').locator('option').allInnerTexts()) expect(text).toContain('Altiplano Nightwatch');
	for (const text of await b.getByTestId('claim-telescope').locator('option').allInnerTexts()) expect(text).toContain('Karoo Wide Field');

	const rowA = a.locator('[data-testid="galaxy-row"][data-rank="1"]');
	const rowB = b.locator('[data-testid="galaxy-row"][data-rank="1"]');
	await expect(rowB.getByRole('button', { name: /^Claim / })).toBeVisible();
	await b.screenshot({ path: `${SCREENS}/claims-1-open.png`, fullPage: true });

	// A claims the top galaxy; B, who has not reloaded, sees it taken within a second.
	await rowA.getByRole('button', { name: /^Claim / }).click();
	await expect(rowA.getByTestId('claim-state')).toHaveText('claimed');
	await expect(rowA.getByTestId('claim-cell')).toContainText('Altiplano Nightwatch');
	await expect(rowB.getByTestId('claim-state')).toHaveText('claimed', { timeout: 1000 });
	await expect(rowB.getByTestId('claim-cell')).toContainText('Altiplano Nightwatch');
	// The holder's buttons are the holder's only.
	await expect(rowB.getByRole('button', { name: /^(Start|Done|Release) / })).toHaveCount(0);
	await b.screenshot({ path: `${SCREENS}/claims-2-taken-live.png`, fullPage: true });

	// B claims the same galaxy anyway (a plain form post, as from a page that had not yet heard): refused, holder named.
	const targetId = await rowB.getByTestId('claim-cell').getAttribute('data-target-id');
	const galaxyName = (await rowB.locator('td').nth(1).innerText()).trim();
	expect(targetId).toMatch(/^\d+$/);
	const telescopeId = await b.getByTestId('claim-telescope').inputValue();
	await b.evaluate(
		({ targetId, telescopeId }) => {
			const form = document.createElement('form');
			form.method = 'POST';
			form.action = '?/claim';
			for (const [name, value] of Object.entries({ targetKind: 'galaxy', targetId, telescopeId })) {
				const input = document.createElement('input');
				input.type = 'hidden';
				input.name = name;
				input.value = value;
				form.append(input);
			}
			document.body.append(form);
			form.submit();
		},
		{ targetId: targetId!, telescopeId }
	);
	await expect(b.getByTestId('claim-message')).toContainText('Already taken by Altiplano Nightwatch');
	// The galaxy is named as its row names it, not by its catalogue row id.
	await expect(b.getByTestId('claim-message')).toContainText(`: ${galaxyName}.`);
	await b.screenshot({ path: `${SCREENS}/claims-2b-refused.png`, fullPage: true });
	await b.goto(`/events/${eventId}/targets`);
	await expect(b.locator('[data-hydrated="yes"]')).toBeVisible();
	await expect(rowB.getByTestId('claim-state')).toHaveText('claimed');
	// Let the reloaded page join the event's room before the next change.
	await b.waitForTimeout(500);

	// A starts observing; B sees it.
	await rowA.getByRole('button', { name: /^Start / }).click();
	await expect(rowA.getByTestId('claim-state')).toHaveText('observing');
	await expect(rowB.getByTestId('claim-state')).toHaveText('observing', { timeout: 2000 });

	const raDeg = (await rowA.locator('td').nth(2).innerText()).replace('°', '');
	const decDeg = (await rowA.locator('td').nth(3).innerText()).replace('°', '');

	// B moves to the event page: nothing covered yet; the sky view shows the targets by claim state.
	await b.goto(`/events/${eventId}`);
	await expect(b.locator('[data-hydrated="yes"]')).toBeVisible();
	await expect(b.getByTestId('coverage-none')).toBeVisible();
	await expect(b.getByTestId('sky-map')).toHaveAttribute('data-ready', 'true');
	await expect(b.locator('path.sky-galaxy.state-observing')).toHaveCount(1);
	await expect(b.locator('path.sky-galaxy.state-open').first()).toBeVisible();
	await expect(b.locator('path.sky-footprint')).toHaveCount(0);
	// B claims another galaxy from the sky view itself: click it on the map, then Claim.
	// A real click at a marker's place: the first open galaxy that nothing else covers there.
	const open = b.locator('path.sky-galaxy.state-open');
	let clicked = false;
	for (let i = 0; i < Math.min(20, await open.count()) && !clicked; i++) {
		clicked = await open
			.nth(i)
			.click({ timeout: 1000 })
			.then(() => true)
			.catch(() => false);
	}
	expect(clicked).toBe(true);
	await expect(b.getByTestId('pick-state')).toHaveAttribute('data-state', 'open');
	const pickedLabel = (await b.getByTestId('pick-label').innerText()).trim();
	await b.getByTestId('pick-claim').getByRole('button', { name: /^Claim / }).click();
	await expect(b.getByTestId('pick-message')).toHaveText(`Claimed ${pickedLabel}.`);
	await expect(b.getByTestId('pick-state')).toHaveAttribute('data-state', 'mine');
	await expect(b.locator('path.sky-galaxy.state-mine')).toHaveCount(1);
	await b.screenshot({ path: `${SCREENS}/claims-3-sky-claim.png`, fullPage: true });
	// Let the page settle in the event's room before A's report.
	await b.waitForTimeout(500);

	// A reports the pointing at the galaxy: a bad value first is refused with the other values kept.
	await a.goto(`/events/${eventId}/report`);
	await expect(a.locator('[data-hydrated="yes"]')).toBeVisible();
	const observedAt = new Date(Date.now() - 60_000).toISOString().slice(0, 19) + 'Z';
	const reportForm = a.getByTestId('report-form');
	await reportForm.getByLabel('Telescope').selectOption({ label: 'Pardo 0.6 m (Altiplano Nightwatch; filters g, r, i)' });
	await reportForm.getByLabel('Time (UTC)').fill(observedAt);
	await reportForm.getByLabel('RA (deg, J2000)').fill(raDeg);
	await reportForm.getByLabel('Dec (deg, J2000)').fill(decDeg);
	await reportForm.getByLabel('Filter').fill('r');
	await reportForm.getByLabel('Exposure (s)').fill('300');
	await reportForm.getByLabel('Limiting magnitude (AB)').fill('45');
	await reportForm.getByRole('button', { name: 'Report pointing' }).click();
	await expect(a.getByTestId('error-limitingMag')).toContainText('Limiting magnitude (AB) must be from 5 to 30.');
	await expect(reportForm.getByLabel('RA (deg, J2000)')).toHaveValue(raDeg);
	await expect(reportForm.getByLabel('Filter')).toHaveValue('r');
	await a.screenshot({ path: `${SCREENS}/claims-4-report-error.png`, fullPage: true });
	await reportForm.getByLabel('Limiting magnitude (AB)').fill('20.4');
	await reportForm.getByRole('button', { name: 'Report pointing' }).click();
	await expect(a.getByTestId('report-ok')).toContainText('completed 1 claim');

	// B's event page, untouched, sees coverage rise and the footprint on the sky; the galaxy is observed.
	await expect(b.getByTestId('coverage-union')).toBeVisible({ timeout: 3000 });
	const coveredB = Number(await b.getByTestId('coverage-union').getAttribute('data-value'));
	expect(coveredB).toBeGreaterThan(0);
	await expect(b.getByTestId('coverage-team')).toHaveCount(1);
	await expect(b.getByTestId('coverage-team')).toContainText('Altiplano Nightwatch');
	await expect(b.getByTestId('coverage-galaxies')).not.toHaveText('0%');
	await expect(b.locator('path.sky-footprint')).toHaveCount(1);
	await expect(b.locator('path.sky-galaxy.state-done')).toHaveCount(1);
	await expect(b.getByTestId('sky-summary')).toContainText('1 observed footprint,');
	await expect(b.getByTestId('coverage-curve')).toHaveAttribute('data-ready', 'yes');
	await b.getByTestId('coverage').scrollIntoViewIfNeeded();
	await b.screenshot({ path: `${SCREENS}/claims-5-coverage-seen.png`, fullPage: true });
	// A sees the same figures on the event page.
	await a.goto(`/events/${eventId}`);
	await expect(a.getByTestId('coverage-union')).toHaveAttribute('data-value', String(coveredB));
	await expect(a.locator('path.sky-footprint')).toHaveCount(1);
	await a.screenshot({ path: `${SCREENS}/claims-5b-coverage-a.png`, fullPage: true });
	// The targets table shows A's claim done.
	await b.goto(`/events/${eventId}/targets`);
	await expect(rowB.getByTestId('claim-state')).toHaveText('done');
	await expect(rowB.getByRole('button', { name: /^Claim / })).toHaveCount(0);
	await a.goto(`/events/${eventId}/report`);

	// A CSV with a bad row stores nothing and names the line.
	const csv = `${WORK}/pointings.csv`;
	writeFileSync(csv, ['observed_at,ra_deg,dec_deg,filter,exposure_s,limiting_mag', `${observedAt},${raDeg},${decDeg},r,120,20.1`, `${observedAt},400,${decDeg},r,120,20.1`].join('\n') + '\n');
	await a.getByTestId('csv-file').setInputFiles(csv);
	await a.getByTestId('upload-form').getByRole('button', { name: 'Upload' }).click();
	await expect(a.getByTestId('csv-errors')).toContainText('Line 3:');
	await expect(a.getByTestId('csv-errors')).toContainText('RA (deg, J2000) must be from 0 up to (not including) 360.');
	await a.screenshot({ path: `${SCREENS}/claims-6-csv-refused.png`, fullPage: true });
});
