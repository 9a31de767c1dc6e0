import { test, expect, type Page } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import Database from 'better-sqlite3';
import { ROLES_LIST, type RoleName } from '../../../src/lib/roles';
import { signInAs } from '../support/people';
import { publishNightEvent } from '../support/events';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });
const SOURCE_ID = 'SX30090101';

test.describe.configure({ mode: 'serial' });

let eventId = '';
test.beforeAll(async ({ browser }) => {
	test.setTimeout(90_000);
	const page = await browser.newPage();
	await signInAs(page, 'coordinator');
	eventId = await publishNightEvent(page, SOURCE_ID);
	// The targets page and the claim below need the ranked galaxies.
	await expect
		.poll(async () => ((await (await page.request.get(`/api/v1/events/${eventId}/galaxies?limit=1`)).json()) as { galaxies: unknown[] }).galaxies.length, { timeout: 60_000 })
		.toBe(1);
	await page.close();
});
// The other browser tests start from an empty board: remove this spec's event.
test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	sqlite.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	sqlite.close();
});

/** Same-origin pages linked from the menu and the page's main part (downloads left out). */
async function linksOn(page: Page): Promise<string[]> {
	const hrefs = await page.locator('nav[aria-label="Main"] a[href^="/"], main a[href^="/"]:not([download])').evaluateAll((as) => as.map((a) => (a as HTMLAnchorElement).getAttribute('href')!));
	return hrefs.map((h) => h.split('#')[0]).filter((h) => h !== '');
}

for (const role of ROLES_LIST) {
	test(`${role}: every link in the menu and on the board and the event page opens`, async ({ page }) => {
		test.setTimeout(180_000);
		await signInAs(page, role);
		const seen = new Set(await linksOn(page));
		// The targets page's own links too (its sorting and paging links only re-order the same page).
		await page.goto(`/events/${eventId}/targets`);
		for (const href of await linksOn(page)) if (!href.includes('?')) seen.add(href);
		await page.goto(`/events/${eventId}`);
		await expect(page.getByTestId('event-page')).toBeVisible();
		for (const href of await linksOn(page)) seen.add(href);
		expect(seen.size).toBeGreaterThan(5);
		const failures: string[] = [];
		for (const href of seen) {
			const res = await page.request.get(href, { maxRedirects: 0 });
			if (res.status() >= 400) failures.push(`${href} ${res.status()}`);
		}
		expect(failures, `links that do not open for ${role}`).toEqual([]);

		// What each role is offered, and not offered.
		const menu = page.getByRole('navigation', { name: 'Main' });
		const reports = ['observer', 'coordinator'].includes(role);
		await expect(page.getByTestId('event-links').getByRole('link', { name: 'Report observations' })).toHaveCount(reports ? 1 : 0);
		const triage = (['admin', 'coordinator', 'duty'] as RoleName[]).includes(role);
		await expect(menu.getByRole('link', { name: 'Triage' })).toHaveCount(triage ? 1 : 0);
		await expect(menu.getByRole('link', { name: 'Notice inbox' })).toHaveCount(triage ? 1 : 0);
		await expect(menu.getByRole('link', { name: 'Admin' })).toHaveCount(['admin', 'coordinator'].includes(role) ? 1 : 0);
		if (role === 'duty') {
			// The duty scientist reads the triage policy but does not edit it.
			await page.goto('/triage');
			await expect(page.getByTestId('triage-policy-view')).toContainText('Largest false-alarm rate');
			await expect(page.getByRole('button', { name: 'Save the policy' })).toHaveCount(0);
		}
	});
}

test('the notice inbox shows a refused notice as text, and a coordinator processes it again', async ({ browser }) => {
	test.setTimeout(60_000);
	const coordinator = await (await browser.newContext({ viewport: { width: 1280, height: 900 } })).newPage();
	await signInAs(coordinator, 'coordinator');
	const xml = `<?xml version="1.0"?>\n<voe:VOEvent xmlns:voe="http://www.ivoa.net/xml/VOEvent/v2.0" ivorn="ivo://strainline.test/inbox#shell-1" role="observation" version="2.0">\n<Who><Description><script>window.injected = 1</script></Description>\n`;
	const res = await coordinator.request.post('/api/v1/notices', { data: xml, headers: { 'content-type': 'application/xml' } });
	expect(res.status()).toBe(422);
	const { error } = (await res.json()) as { error: { message: string; details: { inboxId: number } } };

	await coordinator.goto('/events');
	await coordinator.getByRole('main').getByRole('link', { name: 'Notice inbox' }).click();
	await expect(coordinator).toHaveURL(/\/inbox$/);
	await expect(coordinator.locator('[data-hydrated="yes"]')).toBeVisible();
	const item = coordinator.locator(`[data-testid="inbox-item"][data-inbox-id="${error.details.inboxId}"]`);
	await expect(item).toHaveAttribute('data-state', 'refused');
	await expect(item.getByTestId('inbox-reason')).toContainText(error.message);
	await item.getByText(/^Raw text/).click();
	// The raw text is shown as text: its markup is not part of the page.
	await expect(item.getByTestId('inbox-raw')).toHaveText(xml);
	expect(await item.locator('pre script').count()).toBe(0);
	expect(await coordinator.evaluate(() => (window as unknown as { injected?: number }).injected)).toBeUndefined();

	await item.getByRole('button', { name: `Process notice ${error.details.inboxId} again` }).click();
	await expect(item.getByTestId('retry-outcome')).toHaveText(`Refused again: ${error.message}`);
	await coordinator.screenshot({ path: `${SCREENS}/inbox-desktop.png`, fullPage: true });

	// The duty scientist sees the same list, without the button.
	const duty = await (await browser.newContext()).newPage();
	await signInAs(duty, 'duty');
	await duty.goto('/inbox');
	await expect(duty.locator(`[data-testid="inbox-item"][data-inbox-id="${error.details.inboxId}"]`)).toBeVisible();
	await expect(duty.getByRole('button', { name: /Process notice/ })).toHaveCount(0);
});

test('the API answers in people’s words: missing and non-numeric fields, a taken target, a bad token', async ({ page }) => {
	await signInAs(page, 'coordinator');
	const bad = await page.request.post('/api/v1/observations', { data: { eventId, raDeg: 10, decDeg: 'ten', filter: 'r', exposureS: 'NaN' } });
	expect(bad.status()).toBe(422);
	const body = (await bad.json()) as { error: { message: string; details: Record<string, string> } };
	expect(body.error.details).toMatchObject({
		observedAt: 'Time (UTC) is missing.',
		decDeg: 'Dec (deg, J2000) must be a number.',
		exposureS: 'Exposure (s) must be a number.',
		limitingMag: 'Limiting magnitude (AB) is missing.'
	});
	expect(body.error.message).not.toMatch(/observedAt|exposureS|Invalid input|expected|received/);

	const noTelescope = await page.request.post(`/api/v1/events/${eventId}/claims`, { data: { targetKind: 'galaxy', targetId: '1' } });
	expect((await noTelescope.json()).error.message).toBe('Telescope is missing.');

	// The second claim on a galaxy is told who holds it, and the galaxy by its name.
	const [top] = ((await (await page.request.get(`/api/v1/events/${eventId}/galaxies?limit=1`)).json()) as { galaxies: { galaxyId: number; name: string }[] }).galaxies;
	const html = await (await page.request.get('/telescopes')).text();
	const [first, second] = [...html.matchAll(/href="\/telescopes\/([a-z0-9]+)"/g)].map((m) => m[1]).filter((id) => id !== 'new');
	const claim = (telescopeId: string) => page.request.post(`/api/v1/events/${eventId}/claims`, { data: { targetKind: 'galaxy', targetId: String(top.galaxyId), telescopeId } });
	expect((await claim(first)).status()).toBe(201);
	const taken = await claim(second);
	expect(taken.status()).toBe(409);
	const takenMessage = (await taken.json()).error.message as string;
	expect(takenMessage).toContain(`: ${top.name}`);
	expect(takenMessage).not.toContain(`galaxy ${top.galaxyId}`);

	const stranger = await page.request.get('/api/v1/me', { headers: { authorization: 'Bearer not-a-real-token' } });
	expect(stranger.status()).toBe(401);
	expect(stranger.headers()['www-authenticate']).toContain('invalid_token');
	expect((await stranger.json()).error).toEqual({ code: 'invalid_token', message: expect.stringMatching(/^This API token is not valid/) });
});

test.describe('on a phone (390 × 844)', () => {
	test.use({ viewport: { width: 390, height: 844 }, hasTouch: true });

	/** No sideways scroll of the page; on failure, names the widest elements that stick out. */
	const noSideScroll = async (page: Page, what: string) => {
		const { scrollWidth, innerWidth, wide } = await page.evaluate(() => ({
			scrollWidth: document.scrollingElement!.scrollWidth,
			innerWidth: window.innerWidth,
			wide: [...document.querySelectorAll('main *')]
				.filter((e) => e.getBoundingClientRect().right > window.innerWidth + 0.5)
				.slice(-5)
				.map((e) => `${e.tagName.toLowerCase()} “${(e.textContent ?? '').trim().slice(0, 30)}”`)
		}));
		expect(scrollWidth, `${what} is wider than the screen (${wide.join('; ')})`).toBeLessThanOrEqual(innerWidth);
	};

	test('a compact header, a menu that opens by touch and keyboard, and pages that do not scroll sideways', async ({ page }) => {
		test.setTimeout(90_000);
		await signInAs(page, 'coordinator');
		const header = page.getByTestId('app-header');
		expect((await header.boundingBox())!.height).toBeLessThan(80);
		// The user menu is on screen.
		const userMenu = (await page.getByTestId('user-menu').boundingBox())!;
		expect(userMenu.x + userMenu.width).toBeLessThanOrEqual(390);

		await noSideScroll(page, 'the board');
		await page.screenshot({ path: `${SCREENS}/phone-board.png`, fullPage: true });
		const pages: [string, string][] = [
			[`/events/${eventId}`, 'event-page'],
			[`/events/${eventId}/targets`, 'galaxies-table'],
			['/candidates', 'candidates-page'],
			[`/events/${eventId}/plan`, 'plan-page'],
			['/roster', 'shifts'],
			['/account', 'sessions'],
			['/inbox', 'inbox']
		];
		for (const [path, testid] of pages) {
			await page.goto(path);
			await expect(page.locator('[data-hydrated="yes"]')).toBeVisible();
			await expect(page.getByTestId(testid).or(page.getByTestId('candidates-empty')).first()).toBeVisible();
			await noSideScroll(page, path);
			if (path.endsWith('/targets')) await page.screenshot({ path: `${SCREENS}/phone-targets.png`, fullPage: true });
		}

		// The menu: closed, opened by a tap, its links work and it closes on the way.
		const menu = page.getByRole('navigation', { name: 'Main' });
		const button = page.getByTestId('menu-button');
		await expect(menu).toBeHidden();
		await button.tap();
		await expect(button).toHaveAttribute('aria-expanded', 'true');
		await expect(menu.getByRole('link', { name: 'Roster' })).toBeVisible();
		await page.screenshot({ path: `${SCREENS}/phone-menu.png` });
		await menu.getByRole('link', { name: 'Roster' }).tap();
		await expect(page).toHaveURL(/\/roster$/);
		await expect(menu).toBeHidden();

		// By keyboard: Enter opens, Tab reaches the links, Escape closes and gives focus back.
		await button.focus();
		await page.keyboard.press('Enter');
		await expect(menu).toBeVisible();
		await page.keyboard.press('Tab');
		await expect(menu.getByRole('link').first()).toBeFocused();
		await page.keyboard.press('Escape');
		await expect(menu).toBeHidden();
		await expect(button).toBeFocused();
		await page.keyboard.press('Enter');
		await menu.getByRole('link', { name: 'Teams' }).focus();
		await page.keyboard.press('Enter');
		await expect(page).toHaveURL(/\/teams$/);
	});
});
