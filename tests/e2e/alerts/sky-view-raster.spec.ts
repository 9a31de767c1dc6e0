import { test, expect } from '@playwright/test';
import Database from 'better-sqlite3';
import { signInAs } from '../support/people';
import { publishNightEvent } from '../support/events';

/**
 * The sky map's display raster is not inlined in the event page: the sky view fetches it from its
 * own path, which the browser may keep (private, with an ETag), and which answers only as the page would.
 */
const SOURCE_ID = 'SX30120277';
let eventId = '';

test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	if (eventId) sqlite.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	sqlite.close();
});

test('the sky view fetches the raster from a cacheable path that answers only a signed-in viewer of that event', async ({ browser, playwright, baseURL }) => {
	test.setTimeout(90_000);
	const page = await (await browser.newContext({ viewport: { width: 1280, height: 900 } })).newPage();
	await signInAs(page, 'coordinator');
	eventId = await publishNightEvent(page, SOURCE_ID);

	// A fresh load of the event page: the view asks for the raster and draws it.
	const asked = page.waitForResponse((r) => /\/sky\/[^/]+\/raster$/.test(new URL(r.url()).pathname));
	await page.reload();
	const first = await asked;
	const path = new URL(first.url()).pathname;
	expect(path).toMatch(new RegExp(`^/events/${eventId}/sky/[^/]+/raster$`));
	const sky = page.getByTestId('sky-view');
	await expect(sky.getByTestId('sky-map')).toHaveAttribute('data-ready', 'true', { timeout: 15_000 });
	await expect(sky.locator('img.sky-raster')).toHaveCount(1);
	// The page's own HTML does not carry the raster, nor the sky view: it names the sky view's address,
	// whose answer names the raster's path.
	const html = await (await page.request.get(`/events/${eventId}`)).text();
	expect(html).not.toContain('"density"');
	const viewPath = new RegExp(`/events/${eventId}/sky/view\\?v=[\\d.]+`).exec(html)?.[0];
	expect(viewPath).toBeTruthy();
	const view = await page.request.get(viewPath!);
	expect(view.status()).toBe(200);
	expect(await view.text()).not.toContain('"density"');
	expect(((await view.json()) as { rasterUrl: string }).rasterUrl).toBe(path);
	// Signed out, the sky view is refused as the page is.
	const outsider = await playwright.request.newContext({ baseURL });
	expect((await outsider.get(viewPath!, { maxRedirects: 0 })).status()).toBe(401);
	await outsider.dispose();

	// Signed in: the raster, kept privately by the browser and revalidated by its ETag.
	const ok = await page.request.get(path);
	expect(ok.status()).toBe(200);
	expect(ok.headers()['cache-control']).toMatch(/^private, max-age=\d+$/);
	const etag = ok.headers()['etag'];
	expect(etag).toMatch(/^"[\w-]+"$/);
	const body = (await ok.json()) as { width: number; height: number; density: string; level: string };
	expect(body.width * body.height).toBeGreaterThan(0);
	expect(body.density.length).toBeGreaterThan(100);
	const again = await page.request.get(path, { headers: { 'if-none-match': etag } });
	expect(again.status()).toBe(304);

	// Another event's path for this map, or a map that does not exist: not found.
	const skymapId = path.split('/')[4];
	expect((await page.request.get(`/events/no-such-event/sky/${skymapId}/raster`)).status()).toBe(404);
	expect((await page.request.get(`/events/${eventId}/sky/no-such-map/raster`)).status()).toBe(404);

	// Signed out: refused, as the page itself is.
	const stranger = await playwright.request.newContext({ baseURL });
	expect((await stranger.get(path, { maxRedirects: 0 })).status()).toBe(401);
	await stranger.dispose();
});
