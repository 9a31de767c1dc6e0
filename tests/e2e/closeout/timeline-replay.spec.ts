import { test, expect, type Page } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import Database from 'better-sqlite3';
import { signInAs } from '../support/people';
import { nightPeak, publishNightEvent } from '../support/events';

/** The event's timeline (filter by kind, a live arrival) and the sky view's replay slider. */

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });
const SOURCE = 'SX30121301';

const database = () => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	return sqlite;
};

let eventId = '';
test.afterAll(() => {
	if (!eventId) return;
	const sqlite = database();
	sqlite.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	sqlite.close();
});

async function point(page: Page, telescopeId: string, offsetDeg: number) {
	const peak = nightPeak();
	const res = await page.request.post('/api/v1/observations', {
		data: { eventId, telescopeId, observedAt: new Date(Date.now() - 60_000).toISOString(), raDeg: (peak.raDeg + offsetDeg + 360) % 360, decDeg: peak.decDeg, filter: 'r', exposureS: 90, limitingMag: 20.5 }
	});
	expect(res.status(), await res.text()).toBe(201);
}

test('timeline filters by kind and takes new entries live; the replay slider shows fewer footprints earlier', async ({ page }) => {
	test.setTimeout(90_000);
	await signInAs(page, 'coordinator');
	eventId = await publishNightEvent(page, SOURCE);
	const sqlite = database();
	const scope = sqlite.prepare("SELECT id FROM telescope WHERE name = 'Karoo Schmidt 1.0 m'").get() as { id: string };
	sqlite.close();
	await point(page, scope.id, -2);
	await page.waitForTimeout(50);
	await point(page, scope.id, 2);

	// The replay: live shows both footprints; Home takes the slider to the first notice (none yet);
	// "Previous change" from live steps back to the last pointing's moment, then the first one's.
	await page.goto(`/events/${eventId}`);
	const replay = page.getByTestId('replay');
	await expect(replay).toHaveAttribute('data-mode', 'live');
	await expect(replay.getByTestId('replay-footprints')).toHaveAttribute('data-count', '2');
	await expect(page.getByTestId('sky-map')).toHaveAttribute('data-ready', 'true', { timeout: 15_000 });
	await replay.getByTestId('replay-previous').click();
	await replay.getByTestId('replay-previous').click();
	await expect(replay).toHaveAttribute('data-mode', 'replay');
	await expect(replay).toHaveAttribute('data-loading', 'no');
	await expect(replay.getByTestId('replay-footprints')).toHaveAttribute('data-count', '1');
	await expect(page.locator('path.sky-footprint')).toHaveCount(1);
	const slider = replay.getByTestId('replay-slider');
	await slider.focus();
	await page.keyboard.press('Home');
	await expect(replay.getByTestId('replay-time')).toContainText('As it stood at');
	await expect(replay.getByTestId('replay-footprints')).toHaveAttribute('data-count', '0');
	await expect(replay.getByTestId('replay-map')).toContainText('initial notice');
	await expect(page.locator('path.sky-footprint')).toHaveCount(0);
	await page.getByTestId('sky-section').screenshot({ path: `${SCREENS}/replay-1-first-notice.png` });
	await replay.getByTestId('replay-live').click();
	await expect(replay).toHaveAttribute('data-mode', 'live');
	await expect(replay.getByTestId('replay-footprints')).toHaveAttribute('data-count', '2');

	// The timeline, linked from the event page.
	await page.getByTestId('event-links').getByRole('link', { name: 'Timeline' }).click();
	await expect(page.getByTestId('timeline-page')).toBeVisible();
	await expect(page.locator('[data-testid="timeline-entry"][data-kind="notice"]')).toHaveCount(1);
	await expect(page.locator('[data-testid="timeline-entry"][data-kind="pointing"]')).toHaveCount(2);
	await page.getByTestId('filter-kind').selectOption('pointing');
	await expect(page).toHaveURL(/kind=pointing/);
	const entries = page.getByTestId('timeline-entry');
	await expect(entries).toHaveCount(2);
	for (const kind of await entries.evaluateAll((els) => els.map((e) => e.getAttribute('data-kind')))) expect(kind).toBe('pointing');
	await expect(page.getByTestId('timeline-count')).toContainText('2 entries');

	// A third pointing arrives while the page is open: it shows up without a reload.
	await point(page, scope.id, 0);
	await expect(entries).toHaveCount(3, { timeout: 10_000 });
	await expect(page.locator('[data-testid="timeline-entry"][data-new="yes"]')).toHaveCount(1);
	await page.screenshot({ path: `${SCREENS}/timeline-1-pointings.png`, fullPage: true });
});
