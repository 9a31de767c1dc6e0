import { test, expect, type Page, type WebSocketRoute } from '@playwright/test';
import { signInAs } from '../support/people';
import { publishStep, waitForSubscriber } from '../support/broker';

/**
 * Routes the page's live-hub websocket through the test so the connection can be cut and the
 * reconnection attempts refused while the browser is also switched offline.
 */
async function cuttableLiveFeed(page: Page) {
	const open = new Set<WebSocketRoute>();
	let refusing = false;
	await page.routeWebSocket(/\/socket\.io\//, (ws) => {
		if (refusing) {
			// Let the browser try for real: being offline, it fails the handshake with an error,
			// as a vanished server would (closing the mock instead sends no error event).
			ws.connectToServer();
			return;
		}
		ws.connectToServer();
		open.add(ws);
		ws.onClose(() => open.delete(ws));
	});
	return {
		async cut() {
			refusing = true;
			await page.context().setOffline(true);
			for (const ws of [...open]) await ws.close({ code: 1001, reason: 'offline' });
		},
		async restore() {
			refusing = false;
			await page.context().setOffline(false);
		}
	};
}

/** The activity list as "what · who", newest first (the time column dropped). */
async function activityTexts(page: Page): Promise<string[]> {
	const texts = await page.getByTestId('activity').locator('li').allInnerTexts();
	return texts.map((t) => t.replace(/^\d\d:\d\d:\d\d UTC/, '').replace(/\s*·\s*/g, ' · ').replace(/\s+/g, ' ').trim());
}

test('after a lost connection the board says so, then catches up without a reload', async ({ page, browser }) => {
	test.setTimeout(60_000);
	const feed = await cuttableLiveFeed(page);
	await signInAs(page, 'duty');
	const status = page.getByTestId('live-status');
	await expect(status).toHaveAttribute('data-status', 'live');
	// Something a reload would wipe.
	await page.evaluate(() => ((window as unknown as { marker: string }).marker = 'no-reload'));
	const before = await activityTexts(page);

	await feed.cut();
	await expect(status).toHaveAttribute('data-status', 'offline');
	await expect(status).toContainText('Offline');

	// Meanwhile an administrator creates two teams in another browser: two `team.created` board actions.
	const adminContext = await browser.newContext();
	const admin = await adminContext.newPage();
	const adminPerson = await signInAs(admin, 'admin');
	for (const name of ['Reconnect Ridge (demo)', 'Reconnect Vale (demo)']) {
		await admin.goto('/teams');
		await admin.getByLabel('Name').fill(name);
		await admin.getByLabel('Region').fill('Nowhere in particular');
		await admin.getByRole('button', { name: 'Create the team' }).click();
		await expect(admin.getByRole('status').filter({ hasText: 'Team created.' })).toBeVisible();
	}
	await adminContext.close();

	// Still offline, and nothing new has reached the page yet.
	await expect(status).toHaveAttribute('data-status', 'offline');
	expect(await activityTexts(page)).toEqual(before);

	await feed.restore();
	await expect(status).toHaveAttribute('data-status', 'live', { timeout: 20_000 });
	const created = `Team created · ${adminPerson.name}`;
	await expect.poll(async () => (await activityTexts(page)).slice(0, 2)).toEqual([created, created]);
	const after = await activityTexts(page);
	// Each missed action exactly once, ahead of what was there before.
	expect(after.slice(2)).toEqual(before.slice(0, after.length - 2));
	expect(await page.evaluate(() => (window as unknown as { marker?: string }).marker)).toBe('no-reload');
});

test('an event page shows who is watching it now, and updates when someone leaves', async ({ page, browser }) => {
	test.setTimeout(90_000);
	await waitForSubscriber();
	const duty = await signInAs(page, 'duty');
	const { sourceEventId } = await publishStep('bbh', 0);
	const card = page.locator(`[data-testid="board-event"][data-source-id="${sourceEventId}"]`);
	await expect(card).toBeVisible({ timeout: 30_000 });
	const href = await card.getByTestId('event-link').getAttribute('href');
	expect(href).toMatch(/^\/events\//);
	await page.goto(href!);
	const watchers = page.getByTestId('watchers');
	await expect(watchers.getByTestId('watcher')).toHaveCount(1);
	await expect(watchers.getByTestId('watcher')).toHaveAttribute('data-name', duty.name);

	const otherContext = await browser.newContext();
	const other = await otherContext.newPage();
	const coordinator = await signInAs(other, 'coordinator');
	await other.goto(href!);
	await expect(other.getByTestId('watchers').getByTestId('watcher')).toHaveCount(2);
	await expect.poll(() => watchers.getByTestId('watcher').evaluateAll((els) => els.map((e) => e.getAttribute('data-name')))).toEqual(
		[duty.name, coordinator.name].sort((a, b) => a.localeCompare(b))
	);
	await page.screenshot({ path: 'test-results/screens/event-watchers.png' });

	// Back to the board: the coordinator is no longer watching the event.
	await other.goto('/');
	await expect(watchers.getByTestId('watcher')).toHaveCount(1);
	await expect(watchers.getByTestId('watcher')).toHaveAttribute('data-name', duty.name);
	await otherContext.close();
});
