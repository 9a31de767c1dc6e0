import { test, expect, request as newRequest, type Page } from '@playwright/test';
import { mkdirSync, readFileSync } from 'node:fs';
import Database from 'better-sqlite3';
import { demo, signInAs, signIn } from '../support/people';
import { newestMail, linkIn } from '../support/mail';
import { BASE_URL } from '../../../playwright.config';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });
const DB_PATH = process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite';

function sqlite() {
	const db = new Database(DB_PATH);
	db.pragma('busy_timeout = 5000');
	db.pragma('foreign_keys = ON');
	return db;
}

function storedKinds(email: string): Record<string, string> | null {
	const db = sqlite();
	const row = db.prepare('SELECT p.kinds FROM notification_preference p JOIN user u ON u.id = p.user_id WHERE u.email = ?').get(email) as { kinds: string } | undefined;
	db.close();
	return row ? JSON.parse(row.kinds) : null;
}

let eventId = '';
const touched = [demo('observer').email, demo('coordinator').email, demo('duty').email];

// Leave everyone with the default preferences, and the board without this test's event.
test.afterAll(() => {
	const db = sqlite();
	for (const email of touched) db.prepare('DELETE FROM notification_preference WHERE user_id = (SELECT id FROM user WHERE email = ?)').run(email);
	if (eventId) db.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	db.close();
});

async function signOut(page: Page) {
	await page.getByTestId('user-menu').click();
	await page.getByRole('button', { name: 'Sign out', exact: true }).click();
	await expect(page).toHaveURL(/\/$/);
}

test('a member sets e-mail preferences; a bad time zone is refused with what was chosen kept; they hold after signing out and in', async ({ page }) => {
	const me = await signInAs(page, 'observer');
	await page.goto('/account');
	const section = page.getByTestId('notifications');
	await expect(section.getByTestId('duty.page-now')).toHaveCount(0);
	await section.getByTestId('claim.lapsed-off').check();
	await section.getByTestId('candidate.classified-digest').check();
	await section.getByTestId('classes-some').check();
	await section.getByTestId('class-BNS').check();
	await section.getByTestId('class-NSBH').check();
	await section.getByTestId('quiet').check();
	await section.getByLabel('From').fill('22:30');
	await section.getByLabel('Until').fill('06:15');
	await section.getByLabel('Time zone').fill('Europe/Atlantis');
	await section.getByLabel('Put them in the digest').check();
	await section.getByTestId('digest-period').selectOption('360');
	await section.getByTestId('save-preferences').click();

	await expect(section.getByTestId('error-timeZone')).toContainText('“Europe/Atlantis” is not a time zone we know');
	// Nothing chosen is lost.
	await expect(section.getByTestId('claim.lapsed-off')).toBeChecked();
	await expect(section.getByTestId('candidate.classified-digest')).toBeChecked();
	await expect(section.getByTestId('class-NSBH')).toBeChecked();
	await expect(section.getByLabel('From')).toHaveValue('22:30');
	await expect(section.getByLabel('Time zone')).toHaveValue('Europe/Atlantis');
	await expect(section.getByTestId('digest-period')).toHaveValue('360');
	expect(storedKinds(me.email)).toBeNull();

	await section.getByLabel('Time zone').fill('Europe/Madrid');
	await section.getByTestId('save-preferences').click();
	await expect(section.getByTestId('preferences-done')).toHaveText('E-mail preferences saved.');

	await signOut(page);
	await signIn(page, me.email, me.password);
	await page.goto('/account');
	await expect(section.getByTestId('claim.lapsed-off')).toBeChecked();
	await expect(section.getByTestId('candidate.classified-digest')).toBeChecked();
	await expect(section.getByTestId('claims.moved-now')).toBeChecked();
	await expect(section.getByTestId('classes-some')).toBeChecked();
	await expect(section.getByTestId('class-BNS')).toBeChecked();
	await expect(section.getByTestId('class-BBH')).not.toBeChecked();
	await expect(section.getByLabel('From')).toHaveValue('22:30');
	await expect(section.getByLabel('Until')).toHaveValue('06:15');
	await expect(section.getByLabel('Time zone')).toHaveValue('Europe/Madrid');
	await expect(section.getByLabel('Put them in the digest')).toBeChecked();
	await expect(section.getByTestId('digest-period')).toHaveValue('360');
	for (const [w, h] of [
		[1280, 900],
		[390, 844]
	]) {
		await page.setViewportSize({ width: w, height: h });
		await section.screenshot({ path: `${SCREENS}/account-notifications-${w}.png` });
	}
});

test('an unsubscribe link from a received mail works signed out, after a confirmation, for that person and kind only', async ({ browser }) => {
	// A classification mails the duty scientists and the coordinators.
	const api = async (role: string) => {
		const ctx = await newRequest.newContext({ baseURL: BASE_URL, extraHTTPHeaders: { origin: BASE_URL, accept: 'text/html' } });
		const p = demo(role);
		const res = await ctx.post('/sign-in', { form: { email: p.email, password: p.password }, maxRedirects: 0 });
		expect(res.status()).toBe(303);
		return ctx;
	};
	const coordinator = await api('coordinator');
	const xml = readFileSync('tests/fixtures/notices/bns-initial.xml', 'utf8').replaceAll('SX30041207', 'SX30120221');
	const published = await coordinator.post('/api/v1/notices', { data: xml, headers: { 'content-type': 'application/xml' } });
	expect(published.status(), await published.text()).toBe(201);
	eventId = (await published.json()).eventId;
	await coordinator.dispose();
	const db = sqlite();
	const teamId = (db.prepare('SELECT id FROM team ORDER BY name LIMIT 1').get() as { id: string }).id;
	db.prepare('INSERT INTO candidate (id, event_id, name, ra_deg, dec_deg, discovered_at, magnitude, filter, team_id) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)').run(
		'unsubcandidate1', eventId, 'AT-unsub', 150, -30, Date.parse('2030-04-12T09:00:00Z'), 20, 'r', teamId
	);
	db.close();
	const spectro = await api('spectroscopist');
	const classified = await spectro.post('/api/v1/candidates/unsubcandidate1/classifications', { data: { label: 'sn-ia', confidence: 'medium' } });
	expect(classified.status(), await classified.text()).toBe(201);
	await spectro.dispose();

	const them = demo('coordinator');
	const mail = await newestMail(them.email, 'Classified: AT-unsub');
	const path = linkIn(mail, '/unsubscribe/');
	expect(mail.listUnsubscribe).toBe(`<${BASE_URL}${path}>`);
	await newestMail(demo('duty').email, 'Classified: AT-unsub');

	const page = await (await browser.newContext()).newPage();
	// Someone else's link with one character changed is refused.
	const last = path.at(-1)!;
	await page.goto(path.slice(0, -1) + (last === 'A' ? 'B' : 'A'));
	await expect(page.getByTestId('form-message')).toContainText('This unsubscribe link is not valid');

	await page.goto(path);
	await expect(page.getByTestId('offer')).toContainText('Candidate classifications');
	await expect(page.getByTestId('offer')).toContainText(them.name.split(' ')[0]);
	// Opening the link changed nothing.
	expect(storedKinds(them.email)?.['candidate.classified']).toBeUndefined();
	for (const [w, h] of [
		[1280, 800],
		[390, 844]
	]) {
		await page.setViewportSize({ width: w, height: h });
		await page.screenshot({ path: `${SCREENS}/unsubscribe-${w}.png` });
	}
	await page.getByTestId('confirm-unsubscribe').click();
	await expect(page.getByTestId('unsubscribed')).toContainText('you will no longer receive “Candidate classifications”');
	await page.screenshot({ path: `${SCREENS}/unsubscribe-done-390.png` });

	expect(storedKinds(them.email)).toEqual({ 'candidate.classified': 'off' });
	expect(storedKinds(demo('duty').email)).toBeNull();
	// Their account page shows it.
	const signedIn = await (await browser.newContext()).newPage();
	await signInAs(signedIn, 'coordinator');
	await signedIn.goto('/account');
	await expect(signedIn.getByTestId('candidate.classified-off')).toBeChecked();
	await expect(signedIn.getByTestId('claim.lapsed-now')).toBeChecked();
});
