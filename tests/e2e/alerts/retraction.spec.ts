import { test, expect, type Browser, type Page } from '@playwright/test';
import { mkdirSync, readFileSync } from 'node:fs';
import Database from 'better-sqlite3';
import { demo, signInAs } from '../support/people';
import { nightPeak, publishNightEvent } from '../support/events';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

const SOURCE_ID = 'SX30061601';
const REASON = 'Glitch in one detector coincident with the trigger (browser test).';
let eventId = '';

async function signedIn(browser: Browser, role: string): Promise<Page> {
	const page = await (await browser.newContext()).newPage();
	await signInAs(page, role);
	return page;
}

/** The fixture retraction for our event, authored now, with our own stated reason. */
function retractionXml(): string {
	return readFileSync('tests/fixtures/notices/retraction.xml', 'utf8')
		.replaceAll('SX30041315', SOURCE_ID)
		.replace('2030-04-13T15:40:00', new Date().toISOString().slice(0, 19))
		.replace('Retracted: instrumental artefact.', REASON);
}

// Leave the board as the other tests expect: remove this test's event.
test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	sqlite.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	sqlite.close();
});

test('a retraction is carried through: reason shown, clock stopped, stood down on the board, claiming team e-mailed, pointings refused', async ({ browser }) => {
	test.setTimeout(150_000);
	const coordinator = await signedIn(browser, 'coordinator');
	eventId = await publishNightEvent(coordinator, SOURCE_ID);
	const detail = await coordinator.request.get(`/api/v1/events/${eventId}`);
	const mergerIso = ((await detail.json()) as { eventTime: string }).eventTime.replace('.000Z', 'Z');

	// An observer claims the top galaxy, and cannot report a pointing taken before the merger.
	const observer = await signedIn(browser, 'observer');
	await observer.goto(`/events/${eventId}/targets`);
	const rows = observer.getByTestId('galaxy-row');
	await expect(async () => {
		if ((await rows.count()) === 0) await observer.reload();
		await expect(rows.first()).toBeVisible({ timeout: 2000 });
	}).toPass({ timeout: 30_000 });
	await rows.first().getByRole('button', { name: /^Claim / }).click();
	await expect(rows.first().getByTestId('claim-state')).toHaveText('claimed', { timeout: 15_000 });

	await observer.goto(`/events/${eventId}/report`);
	await expect(observer.locator('[data-hydrated="yes"]')).toBeVisible();
	await expect(observer.getByTestId('report-merger')).toContainText(mergerIso);
	const peak = nightPeak();
	const report = observer.getByTestId('report-form');
	const early = new Date(Date.parse(mergerIso) - 3600_000).toISOString().replace('.000Z', 'Z');
	await report.getByLabel('Time (UTC)').fill(early);
	await report.getByLabel('RA (deg, J2000)').fill(peak.raDeg.toFixed(3));
	await report.getByLabel('Dec (deg, J2000)').fill('0');
	await report.getByLabel('Filter').fill('r');
	await report.getByLabel('Exposure (s)').fill('60');
	await report.getByLabel('Limiting magnitude (AB)').fill('20');
	await report.getByRole('button', { name: 'Report pointing' }).click();
	await expect(report.getByTestId('error-observedAt')).toHaveText(`This pointing (${early}) was taken before the merger at ${mergerIso}; only pointings after the merger count.`, { timeout: 15_000 });

	// The source retracts the event (the notice is given by hand here, as the upload page allows).
	await coordinator.goto('/events/upload');
	await expect(coordinator.locator('[data-hydrated="yes"]')).toBeVisible();
	await coordinator.getByLabel('Notice XML').fill(retractionXml());
	await coordinator.getByRole('button', { name: 'Submit the notice' }).click();
	await expect(coordinator.getByTestId('event-page')).toHaveAttribute('data-state', 'retracted', { timeout: 30_000 });

	// The event page: the reason, and a merger clock that has stopped.
	const banner = coordinator.getByTestId('retraction-banner');
	await expect(banner).toContainText('Retracted');
	await expect(banner.getByTestId('retraction-reason')).toContainText(REASON);
	await expect(coordinator.getByTestId('event-brief')).toContainText(REASON);
	const clock = coordinator.getByTestId('since-merger');
	await expect(clock).toHaveAttribute('data-stopped', 'yes');
	await expect(clock).toContainText(/^stood down \d+ min \d\d s after the merger$/);
	const stopped = await clock.innerText();
	await coordinator.waitForTimeout(2100);
	await expect(clock).toHaveText(stopped);
	await coordinator.screenshot({ path: `${SCREENS}/retraction-1-event-page.png`, fullPage: true });

	// The board: out of "Active events", into a section of its own, with the reason and the stopped clock.
	await coordinator.goto('/');
	const stoodDown = coordinator.getByTestId('stood-down');
	const card = stoodDown.locator(`[data-testid="board-event"][data-source-id="${SOURCE_ID}"]`);
	await expect(card).toBeVisible({ timeout: 15_000 });
	await expect(card.getByTestId('retraction-reason')).toContainText(REASON);
	await expect(card.getByTestId('since-merger')).toHaveText(stopped);
	// Nobody is asked to acknowledge a withdrawn alert: the open page is shown as stopped.
	await expect(card.getByTestId('paging-stopped')).toBeVisible();
	await expect(card.getByRole('button', { name: /^Acknowledge/ })).toHaveCount(0);
	await expect(coordinator.getByTestId('board-events').locator(`[data-source-id="${SOURCE_ID}"]`)).toHaveCount(0);
	await coordinator.screenshot({ path: `${SCREENS}/retraction-2-board.png`, fullPage: true });

	// The claiming team's members were e-mailed, with the reason and the released target.
	// (the development mailbox is for administrators only)
	const kenji = demo('observer');
	const admin = await signedIn(browser, 'admin');
	await admin.goto('/mailbox');
	const mail = admin.getByTestId('mail').filter({ hasText: `to ${kenji.email}` }).filter({ hasText: `RETRACTED ${SOURCE_ID} · your claims were released` });
	await expect(async () => {
		await admin.reload();
		await expect(mail).toHaveCount(1, { timeout: 1000 });
	}).toPass({ timeout: 15_000 });
	await expect(mail).toContainText(REASON);
	await expect(mail).toContainText('Altiplano Nightwatch');
	// A member of another team, who held nothing, was not.
	await expect(admin.getByTestId('mail').filter({ hasText: `to ${demo('spectroscopist').email}` }).filter({ hasText: `RETRACTED ${SOURCE_ID} · your claims` })).toHaveCount(0);

	// Pointings on a retracted event are refused, saying why.
	await observer.goto(`/events/${eventId}/report`);
	await expect(observer.getByTestId('report-retracted')).toBeVisible();
	await expect(observer.locator('[data-hydrated="yes"]')).toBeVisible();
	await report.getByLabel('Time (UTC)').fill(new Date().toISOString().slice(0, 19) + 'Z');
	await report.getByLabel('RA (deg, J2000)').fill(peak.raDeg.toFixed(3));
	await report.getByLabel('Dec (deg, J2000)').fill('0');
	await report.getByLabel('Filter').fill('r');
	await report.getByLabel('Exposure (s)').fill('60');
	await report.getByLabel('Limiting magnitude (AB)').fill('20');
	await report.getByRole('button', { name: 'Report pointing' }).click();
	await expect(observer.getByTestId('report-message')).toContainText(`${SOURCE_ID} was retracted by the source`, { timeout: 15_000 });
});
