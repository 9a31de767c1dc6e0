import { test, expect, type Browser, type Page } from '@playwright/test';
import { mkdirSync, readFileSync } from 'node:fs';
import Database from 'better-sqlite3';
import { signInAs } from '../support/people';

/**
 * VOEvent 2.0 semantics (§3.7 Citations, §3.1.2 role) and per-stream vocabularies, as a
 * coordinator meets them. Fixtures: tests/fixtures/notices/standard/ (invented events).
 */
const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

// A name of this run's own, so that a second run on the same database starts clean.
const RUN = String(Date.now()).slice(-6);
const SOURCE_ID = `SX3006${RUN}`;
const TEST_ID = `SXT3006${RUN}`;
const UTILITY_ID = `SXU3006${RUN}`;
const OTHER_ID = `SX3007${RUN}`;
const RENAMED_ID = `A${RUN}99`;
const STREAM = `ivo://strainline.example/alt-pipeline-${RUN}`;
// The same envelopes again, through the upload page, under names of their own.
const UP_ID = `SX3009${RUN}`;
const UP_OTHER_ID = `SX3010${RUN}`;
const UP_TEST_ID = `SXT3009${RUN}`;
const UP_UTILITY_ID = `SXU3009${RUN}`;
const std = (name: string) => readFileSync(`tests/fixtures/notices/standard/${name}`, 'utf8');
const ours = (xml: string) => xml.replaceAll('SX30050101', SOURCE_ID).replace('#withdrawal-0042', `#withdrawal-${RUN}`);

async function signedIn(browser: Browser, role: string, width = 1280): Promise<Page> {
	const page = await (await browser.newContext({ viewport: { width, height: 900 } })).newPage();
	await signInAs(page, role);
	return page;
}

test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	sqlite
		.prepare('DELETE FROM gw_event WHERE source_event_id IN (?, ?, ?, ?, ?, ?, ?, ?, ?)')
		.run(SOURCE_ID, TEST_ID, UTILITY_ID, OTHER_ID, RENAMED_ID, UP_ID, UP_OTHER_ID, UP_TEST_ID, UP_UTILITY_ID);
	sqlite.prepare('DELETE FROM notice_stream WHERE stream = ?').run(STREAM);
	// The retraction sent before its parents waits for packets that never come: take it out of the inbox.
	sqlite.prepare('DELETE FROM notice_inbox WHERE ivorn = ?').run(`ivo://strainline.example/fake-broker#withdrawal-early-${RUN}`);
	sqlite.close();
});

test('a retraction with an empty What, uploaded after its parent, retracts the event the parent made', async ({ browser }) => {
	test.setTimeout(60_000);
	const coordinator = await signedIn(browser, 'coordinator');
	const api = coordinator.request;
	const post = (xml: string) => api.post('/api/v1/notices', { data: xml, headers: { 'content-type': 'application/xml' } });

	// Sent before anything it cites: kept, waiting, with the reason.
	const early = await post(ours(std('retraction-empty-what.xml')).replace(`#withdrawal-${RUN}`, `#withdrawal-early-${RUN}`).replaceAll(SOURCE_ID, `${SOURCE_ID}X`));
	expect(early.status()).toBe(202);
	expect(await early.json()).toMatchObject({ outcome: 'waiting', eventId: null, reason: expect.stringMatching(/^waiting for the cited notices/) });

	// The parent through the API (its sky-map host is not on the allow-list here: no map, not needed).
	const parent = await post(ours(std('namespaced.xml')));
	expect(parent.status()).toBe(201);
	const { eventId } = (await parent.json()) as { eventId: string };
	const revised = await post(ours(std('supersedes-only.xml')));
	expect(await revised.json()).toMatchObject({ eventId, outcome: 'notice-added' });

	await coordinator.goto('/events/upload');
	await expect(coordinator.locator('[data-hydrated="yes"]')).toBeVisible();
	await coordinator.getByLabel('Notice XML').fill(ours(std('retraction-empty-what.xml')));
	await coordinator.getByRole('button', { name: 'Submit the notice' }).click();
	await expect(coordinator).toHaveURL(new RegExp(`/events/${eventId}$`), { timeout: 30_000 });
	await expect(coordinator.getByTestId('event-page')).toHaveAttribute('data-state', 'retracted');
	await expect(coordinator.getByTestId('retraction-reason')).toContainText('Withdrawn: a data-quality flag was raised after the fact.');
	await expect(coordinator.getByTestId('timeline-item')).toHaveCount(3);

	// A test-role notice is stored and marked as such.
	const testRole = await post(std('test-role.xml').replaceAll('SXT30050303', TEST_ID));
	expect(testRole.status()).toBe(201);
	await coordinator.goto(`/events/${((await testRole.json()) as { eventId: string }).eventId}`);
	await expect(coordinator.getByTestId('role-badge').first()).toHaveAttribute('data-role', 'test');
	await coordinator.screenshot({ path: `${SCREENS}/notice-test-role-1280.png`, fullPage: false });

	// The other envelopes through the API: a utility notice, a default namespace, then CDATA and whitespace (its update).
	const utility = await post(std('utility-role.xml').replaceAll('SXU30050404', UTILITY_ID));
	expect(utility.status()).toBe(201);
	expect((await post(std('default-namespace.xml').replaceAll('SX30050202', OTHER_ID))).status()).toBe(201);
	const cdata = await post(std('cdata-whitespace.xml').replaceAll('SX30050202', OTHER_ID));
	expect(await cdata.json()).toMatchObject({ eventId: OTHER_ID.toLowerCase(), outcome: 'notice-added' });

	const phone = await signedIn(browser, 'coordinator', 390);
	await phone.goto(`/events/${((await utility.json()) as { eventId: string }).eventId}`);
	await expect(phone.getByTestId('role-badge').first()).toHaveAttribute('data-role', 'utility');
	await phone.screenshot({ path: `${SCREENS}/notice-utility-role-390.png`, fullPage: false });
	await phone.goto('/');
	await expect(phone.locator('[data-hydrated="yes"]')).toBeVisible();
	await phone.screenshot({ path: `${SCREENS}/board-roles-390.png`, fullPage: true });
});

test("a coordinator edits a stream's vocabulary; the preview reads a renamed-Param notice without storing it", async ({ browser }) => {
	test.setTimeout(60_000);
	const coordinator = await signedIn(browser, 'coordinator');
	const renamed = std('renamed-params.xml').replace('ivo://strainline.example/alt-pipeline#', `${STREAM}#`);
	const vocabulary = JSON.parse(std('renamed-params.vocabulary.json')) as { names: Record<string, string[]> };

	await coordinator.goto('/inbox');
	await coordinator.getByTestId('streams-link').click();
	await coordinator.getByLabel('Another stream').fill(STREAM);
	await coordinator.getByRole('button', { name: 'Open' }).click();
	await expect(coordinator.getByTestId('stream-name')).toHaveText(STREAM);
	await expect(coordinator.locator('[data-hydrated="yes"]')).toBeVisible();

	// With the defaults, the preview gives the exact reason.
	await coordinator.getByLabel('Notice XML').fill(renamed);
	await coordinator.getByRole('button', { name: 'Preview with these names' }).click();
	await expect(coordinator.getByTestId('preview-reason')).toHaveText(/^missing required Param SourceEventId \/ EventId/);

	// A name that is not a name is refused beside its field.
	await coordinator.getByLabel('False-alarm rate', { exact: true }).fill('<FAR>');
	await coordinator.getByRole('button', { name: 'Preview with these names' }).click();
	await expect(coordinator.getByTestId('error-far')).toContainText('letters, digits');

	const labels: Record<string, string> = {
		sourceEventId: 'Event id',
		kind: 'Notice kind',
		far: 'False-alarm rate',
		skymapUrl: 'Sky-map URL',
		classificationGroup: 'Classification group',
		BNS: 'BNS probability',
		NSBH: 'NSBH probability',
		BBH: 'BBH probability',
		Terrestrial: 'Terrestrial probability',
		propertiesGroup: 'Properties group',
		HasNS: 'Has a neutron star',
		HasRemnant: 'Has a remnant',
		HasMassGap: 'Has a mass-gap object'
	};
	for (const [field, label] of Object.entries(labels)) await coordinator.getByLabel(label, { exact: true }).fill(vocabulary.names[field].join(', '));
	await coordinator.getByLabel('Unit of the false-alarm rate when the Param states none').selectOption('per-year');
	await coordinator.getByRole('button', { name: 'Preview with these names' }).click();
	const ok = coordinator.getByTestId('preview-ok');
	await expect(ok).toBeVisible();
	await expect(ok.getByTestId('preview-event')).toHaveText('A30050505');
	await expect(ok.getByTestId('preview-classes')).toContainText('BNS 60.0%');
	// 0.5 per year, stated in Hz in the preview (0.5 / 31 557 600 s).
	await expect(ok.getByTestId('preview-far')).toContainText('1.584e-8 Hz');
	await coordinator.screenshot({ path: `${SCREENS}/notice-streams-1280.png`, fullPage: true });
	await expect(coordinator.getByTestId('stream-state')).toContainText('read with the defaults');

	await coordinator.getByRole('button', { name: 'Save the vocabulary' }).click();
	await expect(coordinator.getByTestId('vocabulary-saved')).toBeVisible();
	await expect(coordinator.getByTestId('stream-state')).toContainText('has its own vocabulary');
	await expect(coordinator.getByLabel('Event id', { exact: true })).toHaveValue('Candidate_Label');
	// The API now reads this stream's notices with its vocabulary.
	const posted = await coordinator.request.post('/api/v1/notices', { data: renamed.replaceAll('A30050505', RENAMED_ID), headers: { 'content-type': 'application/xml' } });
	expect(posted.status()).toBe(201);
	expect(await posted.json()).toMatchObject({ eventId: RENAMED_ID.toLowerCase(), outcome: 'event-created' });

	const phone = await signedIn(browser, 'coordinator', 390);
	await phone.goto(`/inbox/streams?stream=${encodeURIComponent(STREAM)}`);
	await expect(phone.getByTestId('stream-name')).toHaveText(STREAM);
	await phone.screenshot({ path: `${SCREENS}/notice-streams-390.png`, fullPage: true });
});

test('the same envelopes through the upload page: both namespaces, kind only in the citations, CDATA, test and utility roles', async ({ browser }) => {
	test.setTimeout(90_000);
	const coordinator = await signedIn(browser, 'coordinator');
	/** Upload one notice by hand; the page goes to its event. Returns the event's id. */
	const upload = async (xml: string) => {
		await coordinator.goto('/events/upload');
		await expect(coordinator.locator('[data-hydrated="yes"]')).toBeVisible();
		await coordinator.getByLabel('Notice XML').fill(xml);
		await coordinator.getByRole('button', { name: 'Submit the notice' }).click();
		await expect(coordinator.getByTestId('event-page')).toBeVisible({ timeout: 30_000 });
		return new URL(coordinator.url()).pathname.split('/')[2];
	};
	const first = await upload(std('namespaced.xml').replaceAll('SX30050101', UP_ID));
	expect(first).toBe(UP_ID.toLowerCase());
	// Kind only in <Citations cite="supersedes">: an update of the same event.
	expect(await upload(std('supersedes-only.xml').replaceAll('SX30050101', UP_ID))).toBe(first);
	await expect(coordinator.getByTestId('timeline-item')).toHaveCount(2);
	const other = await upload(std('default-namespace.xml').replaceAll('SX30050202', UP_OTHER_ID));
	expect(other).toBe(UP_OTHER_ID.toLowerCase());
	expect(await upload(std('cdata-whitespace.xml').replaceAll('SX30050202', UP_OTHER_ID))).toBe(other);
	await expect(coordinator.getByTestId('timeline-item')).toHaveCount(2);
	await upload(std('test-role.xml').replaceAll('SXT30050303', UP_TEST_ID));
	await expect(coordinator.getByTestId('role-badge').first()).toHaveAttribute('data-role', 'test');
	await upload(std('utility-role.xml').replaceAll('SXU30050404', UP_UTILITY_ID));
	await expect(coordinator.getByTestId('role-badge').first()).toHaveAttribute('data-role', 'utility');
});
