import { test, expect, type Page } from '@playwright/test';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import Database from 'better-sqlite3';
import { signInAs } from '../support/people';
import { nightPeak } from '../support/events';
import { generateSkymap, skymapToFits } from '../../../fake-alert-broker/skymap';
import { buildJsonNotice } from '../../../src/lib/alerts/notice-json';
import { analyseSkymap } from '../../../src/lib/sky';
import { formatArea } from '../../../src/lib/alerts/display';

const SCREENS = 'test-results/screens';
const WORK = 'test-results/e2e-events';
mkdirSync(SCREENS, { recursive: true });
mkdirSync(WORK, { recursive: true });

const BY_HAND = 'SX30120201';
const BY_API = 'SX30120202';
const RETRACTED = 'SX30120203';
const UPDATED_BY_HAND = 'SX30120205';

// Leave the board as the other tests expect: remove this file's events.
test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	sqlite.prepare('DELETE FROM gw_event WHERE source_event_id IN (?, ?, ?, ?)').run(BY_HAND, BY_API, RETRACTED, UPDATED_BY_HAND);
	// The refused notices stay in the inbox, as they should; remove them too.
	sqlite.prepare("DELETE FROM notice_inbox WHERE format = 'json' AND processed_at IS NOT NULL AND error IS NOT NULL").run();
	sqlite.close();
});

/** A compact map opposite the Sun (tonight's targets), as the fake broker writes it. */
function nightMap(sourceId: string): Buffer {
	return skymapToFits(generateSkymap({ components: [{ ...nightPeak(), widthDeg: 3 }], distance: { meanMpc: 118, stdMpc: 24 } }), {
		object: sourceId,
		dateObs: new Date().toISOString().slice(0, 23)
	});
}

/** A JSON notice authored now, for a merger 30 min ago, carrying `skymap` when given. */
function jsonNotice(sourceId: string, kind: 'initial' | 'update' | 'retraction', skymap: Buffer | null, createdAt = new Date()): string {
	return buildJsonNotice({
		supereventId: sourceId,
		kind,
		createdAt: createdAt.toISOString(),
		event:
			kind === 'retraction'
				? null
				: {
						time: new Date(Date.now() - 30 * 60_000).toISOString(),
						farHz: 3e-10,
						significant: true,
						instruments: ['H1', 'L1', 'V1'],
						classification: { BNS: 0.95, NSBH: 0.03, BBH: 0, Terrestrial: 0.02 },
						properties: { HasNS: 1, HasRemnant: 0.97, HasMassGap: 0 },
						skymap
					}
	});
}

async function uploadFile(page: Page, name: string, text: string) {
	const path = `${WORK}/${name}`;
	writeFileSync(path, text);
	await page.goto('/events/upload');
	// Choosing a file before hydration can be lost under load: wait for it.
	await expect(page.locator('[data-hydrated="yes"]')).toBeVisible();
	await page.getByLabel('…or a notice file').setInputFiles(path);
	await page.getByRole('button', { name: 'Submit the notice' }).click();
}

test('a JSON notice uploaded by hand becomes an event with the map it carries and ranked targets', async ({ page }) => {
	// Most of the time goes to the first ranking behind the targets page, which is slow on a loaded machine.
	test.setTimeout(60_000);
	await signInAs(page, 'coordinator');

	// Refused first, in words, and nothing lost: a file nested a thousand levels deep.
	await uploadFile(page, 'deep.json', '{"a":' + '['.repeat(1000) + ']'.repeat(1000) + '}');
	await expect(page.getByTestId('error-noticeFile')).toHaveText('notice nests objects or arrays deeper than 8 levels; refused');
	await page.setViewportSize({ width: 1280, height: 900 });
	await page.screenshot({ path: `${SCREENS}/json-notice-0-upload-refused.png` });
	await page.setViewportSize({ width: 390, height: 844 });
	await page.screenshot({ path: `${SCREENS}/json-notice-0-upload-refused-phone.png`, fullPage: true });
	await page.setViewportSize({ width: 1280, height: 900 });

	const map = nightMap(BY_HAND);
	await uploadFile(page, `${BY_HAND}-initial.json`, jsonNotice(BY_HAND, 'initial', map));
	await expect(page.getByTestId('event-page')).toBeVisible({ timeout: 20_000 });
	// The map inside the notice was analysed as the same file would be.
	await expect(page.getByTestId('area90')).toHaveText(formatArea(analyseSkymap(new Uint8Array(map)).area90));
	await expect(page.getByTestId('timeline-item')).toHaveCount(1);
	await page.screenshot({ path: `${SCREENS}/json-notice-1-event.png` });

	const eventId = new URL(page.url()).pathname.split('/')[2];
	expect(eventId).toBe(BY_HAND.toLowerCase());
	await page.goto(`/events/${eventId}/targets`);
	const rows = page.getByTestId('galaxy-row');
	await expect(async () => {
		if ((await rows.count()) === 0) await page.reload();
		await expect(rows.first()).toBeVisible({ timeout: 2000 });
	}).toPass({ timeout: 15_000 });
	await page.setViewportSize({ width: 390, height: 844 });
	await page.screenshot({ path: `${SCREENS}/json-notice-2-targets-phone.png`, fullPage: true });
});

test('the API takes JSON notices by Content-Type: initial with its map, a repeat, an update without one, a retraction, and refuses hostile ones in words', async ({ page }) => {
	test.setTimeout(30_000);
	await signInAs(page, 'coordinator');
	const post = (data: string, type = 'application/json') => page.request.post('/api/v1/notices', { data, headers: { 'content-type': type } });

	const t0 = Date.now() - 60_000;
	const map = nightMap(BY_API);
	const initial = jsonNotice(BY_API, 'initial', map, new Date(t0));
	const created = await post(initial);
	expect(created.status()).toBe(201);
	const body = (await created.json()) as { eventId: string; outcome: string };
	expect(body.outcome).toBe('event-created');
	expect((await (await post(initial)).json()) as object).toMatchObject({ eventId: body.eventId, outcome: 'repeat' });
	const update = await post(jsonNotice(BY_API, 'update', null, new Date(t0 + 30_000)));
	expect(update.status()).toBe(201);
	expect(((await update.json()) as { outcome: string }).outcome).toBe('notice-added');
	// The update carried no map: the event keeps showing the initial's.
	const detail = (await (await page.request.get(`/api/v1/events/${body.eventId}`)).json()) as { latestKind: string; skymap: { area90: number } };
	expect(detail.latestKind).toBe('update');
	expect(detail.skymap.area90).toBe(analyseSkymap(new Uint8Array(map)).area90);

	const retraction = await post(jsonNotice(RETRACTED, 'retraction', null));
	expect(retraction.status()).toBe(201);
	expect(((await retraction.json()) as { outcome: string }).outcome).toBe('event-retracted');

	const refused = async (data: string) => {
		const res = await post(data);
		expect(res.status()).toBe(422);
		return ((await res.json()) as { error: { message: string } }).error.message;
	};
	// Under an id of their own: the same event, type and time as the accepted notice would be a repeat.
	const other = initial.replaceAll(BY_API, 'SX30120204');
	expect(await refused('not json at all')).toBe('notice is not a JSON object (it should start with "{")');
	expect(await refused(other.replace('"far": 3e-10', '"far": 1e999'))).toBe('event.far must be a finite number (Hz)');
	expect(await refused(other.replace('"significant": true', '"significant": "yes"'))).toBe('event.significant must be true or false');
	expect((await post(readFileSync('tests/fixtures/notices/json/retraction.json', 'utf8'), 'application/octet-stream')).status()).toBe(415);
});

test('an update without a map and a retraction, uploaded by hand as JSON, join their event, which keeps its map', async ({ page }) => {
	test.setTimeout(45_000);
	await signInAs(page, 'coordinator');
	const map = nightMap(UPDATED_BY_HAND);
	const t0 = Date.now() - 120_000;
	const created = await page.request.post('/api/v1/notices', { data: jsonNotice(UPDATED_BY_HAND, 'initial', map, new Date(t0)), headers: { 'content-type': 'application/json' } });
	expect(created.status()).toBe(201);
	const { eventId } = (await created.json()) as { eventId: string };

	await uploadFile(page, `${UPDATED_BY_HAND}-update.json`, jsonNotice(UPDATED_BY_HAND, 'update', null, new Date(t0 + 30_000)));
	await expect(page.getByTestId('event-page')).toBeVisible({ timeout: 20_000 });
	expect(new URL(page.url()).pathname).toBe(`/events/${eventId}`);
	await expect(page.getByTestId('timeline-item')).toHaveCount(2);
	await expect(page.getByTestId('timeline-item').filter({ hasText: 'no map' })).toHaveCount(1);
	await expect(page.getByTestId('area90')).toHaveText(formatArea(analyseSkymap(new Uint8Array(map)).area90));

	await uploadFile(page, `${UPDATED_BY_HAND}-retraction.json`, jsonNotice(UPDATED_BY_HAND, 'retraction', null, new Date(t0 + 60_000)));
	await expect(page.getByTestId('event-page')).toBeVisible({ timeout: 20_000 });
	await expect(page.locator('[data-testid="timeline-item"][data-kind="retraction"]')).toHaveCount(1);
});
