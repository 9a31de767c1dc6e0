import { test, expect, type Browser, type Page } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import { signIn } from '../support/people';
import { DEMO_PEOPLE } from '../../../seeds/scenario';
import { publishNightEvent } from '../support/events';
import { publishStep, waitForSubscriber } from '../support/broker';
import { sunPosition } from '../../../src/lib/targeting/sun-moon';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

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

/** Telescope id of a row of the "Telescopes tonight" table, by name. */
async function telescopeId(page: Page, name: string): Promise<string> {
	return (await page.getByTestId('telescope-row').filter({ hasText: name }).getAttribute('data-telescope-id'))!;
}

test('observers of two teams each see their own telescope’s night, claim with it, and find their claims on their own work page', async ({ browser }) => {
	test.setTimeout(150_000);
	const coordinator = await person(browser, 'coordinator@strainline.demo');
	const eventId = await publishNightEvent(coordinator, 'SX30071101');

	const a = await person(browser, 'observer@strainline.demo'); // Altiplano Nightwatch
	const b = await person(browser, 'observer2@strainline.demo'); // Karoo Wide Field
	await openTargets(a, eventId);
	await openTargets(b, eventId);
	await expect(a.getByTestId('chosen-telescope')).toContainText('Visibility below is for Pardo 0.6 m (Altiplano Nightwatch)');
	// One of Karoo Wide Field's own telescopes (an earlier test may have given the team another one).
	await expect(b.getByTestId('chosen-telescope')).toContainText(/Visibility below is for .+ \(Karoo Wide Field\)/);
	// Another team's telescope is not offered, in the table or through an edited link.
	await expect(a.getByTestId('telescope-row').filter({ hasText: 'Karoo Schmidt 1.0 m' }).getByRole('link')).toHaveCount(0);
	await expect(a.getByTestId('telescope-row').filter({ hasText: 'Pardo Wide 0.3 m' }).getByRole('link')).toHaveCount(1);
	const pardo = await telescopeId(a, 'Pardo 0.6 m');
	await openTargets(b, eventId, `?telescope=${pardo}`);
	await expect(b.getByTestId('chosen-telescope')).toContainText('(Karoo Wide Field)');
	// The event is opposite the Sun: Claim is offered on open rows, with the telescope that is shown.
	await expect(a.getByTestId('claim-telescope')).toHaveValue(pardo);
	await expect(a.locator('[data-testid="galaxy-row"][data-rank="1"]').getByRole('button', { name: /^Claim / })).toBeVisible();
	await expect(a.getByTestId('sun-blocked')).toHaveCount(0);
	// Galaxy columns: the share among catalogue galaxies and how well the distance fits the map.
	await expect(a.getByTestId('galaxies-table').locator('th')).toContainText(['Share', 'Cumulative', 'Distance fit']);
	await expect(a.getByTestId('galaxy-columns-note')).toContainText('not the chance that this galaxy hosts the merger');
	const fits = await a.getByTestId('distance-fit').evaluateAll((cells) => cells.map((c) => Number(c.getAttribute('data-p'))));
	expect(fits.length).toBeGreaterThan(0);
	expect(fits.every((p) => p >= 0 && p <= 1)).toBe(true);
	// Flagged exactly where p < 0.01.
	expect(await a.getByTestId('distance-outlier').count()).toBe(fits.filter((p) => p < 0.01).length);
	await a.screenshot({ path: `${SCREENS}/targets-team-1-altiplano.png`, fullPage: true });
	await b.screenshot({ path: `${SCREENS}/targets-team-2-karoo.png`, fullPage: true });

	// A claims the top galaxy and finds it on the team's own work page, linked from the targets page.
	const top = a.locator('[data-testid="galaxy-row"][data-rank="1"]');
	const topName = await top.locator('td').nth(1).innerText();
	await top.getByRole('button', { name: /^Claim / }).click();
	await expect(top.getByTestId('claim-state')).toHaveText('claimed');
	await a.getByRole('link', { name: 'Our claims and pointings' }).click();
	await expect(a.getByTestId('our-work-page')).toBeVisible();
	await expect(a.getByTestId('work-scope')).toContainText('Altiplano Nightwatch');
	const mine = a.getByTestId('work-claim').filter({ hasText: topName });
	await expect(mine).toHaveAttribute('data-state', 'claimed');
	await expect(mine.getByTestId('ranking-state')).toHaveText('#1');
	await expect(a.getByTestId('open-claim').filter({ hasText: topName })).toContainText('Altiplano Nightwatch');
	await expect(a.getByTestId('work-pointings-empty')).toBeVisible();
	await a.screenshot({ path: `${SCREENS}/targets-team-3-our-work.png`, fullPage: true });
	// B's own list is empty, but the open claim of the other team is listed.
	await b.goto(`/events/${eventId}`);
	await b.getByTestId('event-links').getByRole('link', { name: 'Our claims and pointings' }).click();
	await expect(b.getByTestId('work-claims-empty')).toBeVisible();
	await expect(b.getByTestId('open-claim').filter({ hasText: topName })).toContainText('Altiplano Nightwatch');
});

test('near the Sun, an observer sees why instead of a Claim button, and the server still refuses a claim sent anyway', async ({ browser }) => {
	test.setTimeout(120_000);
	const coordinator = await person(browser, 'coordinator@strainline.demo');
	// 30° east of the Sun along the equator of date: inside every demo telescope's 45° limit.
	const sun = sunPosition({ latitudeDeg: 0, longitudeDeg: 0, elevationM: 0 }, new Date());
	const eventId = await publishNightEvent(coordinator, 'SX30071102', { raDeg: (sun.raDeg + 30) % 360, decDeg: sun.decDeg });
	const a = await person(browser, 'observer@strainline.demo');
	await openTargets(a, eventId);
	const rows = a.getByTestId('galaxy-row');
	const n = await rows.count();
	await expect(a.getByTestId('sun-blocked')).toHaveCount(n);
	await expect(a.getByTestId('sun-blocked').first()).toHaveText('Sun: not for Pardo 0.6 m');
	await expect(a.getByTestId('galaxies-table').getByRole('button', { name: /^Claim / })).toHaveCount(0);
	await expect(a.getByTestId('sun-dropped')).toBeVisible();
	await a.screenshot({ path: `${SCREENS}/targets-team-4-near-sun.png`, fullPage: true });

	// A plain form post with the same telescope: refused by the server with the Sun rule named.
	const targetId = await rows.first().getByTestId('claim-cell').getAttribute('data-target-id');
	const telescopeId = await a.getByTestId('claim-telescope').inputValue();
	await a.evaluate(
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
	await expect(a.getByTestId('claim-message')).toContainText('Sun-avoidance limit');
});

test('odd page, sort and filter values in a link show a page that exists; programs get a 400 with the reason', async ({ browser }) => {
	test.setTimeout(240_000);
	const coordinator = await person(browser, 'coordinator@strainline.demo');
	const eventId = await publishNightEvent(coordinator, 'SX30071103');
	const b = await person(browser, 'observer2@strainline.demo');
	await openTargets(b, eventId);
	const last = await b.getByTestId('pager').isVisible() ? Number(/of (\d+)/.exec(await b.getByTestId('pager').innerText())![1]) : 1;
	// Each odd value in every parameter at once (the full list is in filters.spec.ts, on the parser).
	for (const raw of ['1e309', '-4', '2.5', 'x', '99999999999999999999']) {
		const response = await b.goto(`/events/${eventId}/targets?page=${encodeURIComponent(raw)}&fpage=${encodeURIComponent(raw)}&sort=${encodeURIComponent(raw)}&dir=${encodeURIComponent(raw)}&fsort=x&observable=${encodeURIComponent(raw)}&claim=${encodeURIComponent(raw)}&team=${encodeURIComponent(raw)}&telescope=${encodeURIComponent(raw)}`);
		expect(response!.status(), raw).toBe(200);
		await expect(b.getByTestId('targets-page')).toBeVisible();
		await expect(b.getByTestId('galaxy-row').first()).toBeVisible();
		if (last > 1) {
			const shown = /Page (\d+) of (\d+)/.exec(await b.getByTestId('pager').innerText())!;
			expect(Number(shown[1]), raw).toBeGreaterThanOrEqual(1);
			expect(Number(shown[1]), raw).toBeLessThanOrEqual(Number(shown[2]));
		}
	}
	// A huge page number shows the last page.
	await b.goto(`/events/${eventId}/targets?page=1e309`);
	if (last > 1) await expect(b.getByTestId('pager')).toContainText(`Page ${last} of ${last}`);
	await b.screenshot({ path: `${SCREENS}/targets-odd-page.png`, fullPage: true });

	// The other pages and endpoints that read the query string.
	const scope = await telescopeId(b, 'Karoo Schmidt 1.0 m');
	const status = async (url: string) => (await b.request.get(url)).status();
	expect(await status(`/events/${eventId}/plan?start=1e309`)).toBe(200);
	expect(await status(`/events/${eventId}/plan?start=-1`)).toBe(200);
	expect(await status(`/events/${eventId}/plan/${scope}?start=1e309`)).toBe(200);
	expect(await status(`/events/${eventId}/plan/${scope}?format=1e309`)).toBe(400);
	expect(await status(`/api/v1/events/${eventId}/galaxies?limit=1e309`)).toBe(400);
	expect(await status(`/api/v1/events/${eventId}/galaxies?limit=-1`)).toBe(400);
	expect(await status(`/api/v1/events/${eventId}/galaxies?limit=2.5`)).toBe(400);
	expect(await status(`/api/v1/events/${eventId}/galaxies?limit=x`)).toBe(400);
	expect(await status(`/api/v1/events?state=1e309`)).toBe(400);
	expect(await status(`/api/v1/events/${eventId}/fields?telescope=1e309`)).toBe(404);
	expect(await status(`/api/v1/events/${eventId}/claims?open=1e309`)).toBe(200);
	const refused = await b.request.get(`/api/v1/events/${eventId}/galaxies?limit=1e309`);
	expect(((await refused.json()) as { error: { message: string } }).error.message).toContain('limit must be an integer');
});

test('the demo neutron-star event, played now, lies in tonight’s sky: the plan has targets for several telescopes', async ({ browser }) => {
	test.setTimeout(120_000);
	await waitForSubscriber();
	// The scenario's update notice (the tight map); publishing it again changes nothing if another test did.
	await publishStep('bns', 2);
	const coordinator = await person(browser, 'coordinator@strainline.demo');
	await coordinator.goto('/events/sx30041207/plan');
	const withRows = coordinator.getByTestId('plan-telescope').filter({ has: coordinator.getByTestId('plan-row') });
	await expect(async () => {
		await coordinator.reload();
		expect(await withRows.count()).toBeGreaterThanOrEqual(3);
	}).toPass({ timeout: 60_000 });
	await expect(coordinator.getByTestId('coverage-chart')).toHaveAttribute('data-ready', 'yes');
	await coordinator.screenshot({ path: `${SCREENS}/demo-plan-tonight.png`, fullPage: true });
});
