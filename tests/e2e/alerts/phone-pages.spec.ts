import { test, expect, type Browser, type Page } from '@playwright/test';
import { mkdirSync } from 'node:fs';
import Database from 'better-sqlite3';
import { demo, signInAs } from '../support/people';
import { publishNightEvent } from '../support/events';
import { newestPhone } from '../support/phone';

const SCREENS = 'test-results/screens';
mkdirSync(SCREENS, { recursive: true });

const SOURCE_ID = 'SX30120611';
const NUMBER = '+34611000611';
let eventId = '';

async function signedIn(browser: Browser, role: string): Promise<Page> {
	const page = await (await browser.newContext()).newPage();
	await signInAs(page, role);
	return page;
}

// Leave the app as the other tests expect: no event of ours, the duty scientist's phone as the demo seeds it.
test.afterAll(() => {
	const sqlite = new Database(process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite');
	sqlite.pragma('busy_timeout = 5000');
	sqlite.pragma('foreign_keys = ON');
	if (eventId) sqlite.prepare('DELETE FROM gw_event WHERE id = ?').run(eventId);
	const { email, phone } = demo('duty');
	sqlite.prepare('DELETE FROM phone_contact WHERE user_id = (SELECT id FROM user WHERE email = ?)').run(email);
	if (phone) {
		sqlite
			.prepare('INSERT INTO phone_contact (user_id, number, verified_at, code_tries, channels, updated_at) SELECT id, ?, ?, 0, ?, ? FROM user WHERE email = ?')
			.run(phone.number.replace(/\s/g, ''), Date.now(), JSON.stringify(phone.channels), Date.now(), email);
	}
	sqlite.close();
});

test('the duty scientist verifies a phone, is paged by text and voice, and acknowledges from the link; the board follows live', async ({ browser }) => {
	test.setTimeout(120_000);
	const duty = await signedIn(browser, 'duty');
	await duty.goto('/account#phone');
	const settings = duty.getByTestId('phone-settings');

	// A number that is not in international form is refused, in words, keeping what was typed.
	await settings.getByTestId('phone-input').fill('611 000 611');
	await settings.getByTestId('send-code').click();
	await expect(settings.locator('#phone-error')).toContainText('international form');
	await expect(settings.getByTestId('phone-input')).toHaveValue('611 000 611');

	await settings.getByTestId('phone-input').fill('+34 611 000 611');
	await settings.getByTestId('send-code').click();
	await expect(settings.getByTestId('phone-done')).toContainText(`A code was texted to ${NUMBER}`);
	const code = /code is (\d{6})/.exec((await newestPhone(NUMBER, 'sms', 'verification code')).text)![1];
	await settings.getByTestId('code-input').fill(code === '000000' ? '111111' : '000000');
	await settings.getByTestId('verify-code').click();
	await expect(settings.locator('#code-error')).toContainText('does not match');
	await settings.getByTestId('code-input').fill(code);
	await settings.getByTestId('verify-code').click();
	await expect(settings.getByTestId('phone-number')).toContainText(NUMBER);

	// Voice alone for duty pages is refused: a duty scientist keeps two channels.
	for (const c of ['email', 'sms']) await settings.getByTestId(`channel-duty.page-${c}`).uncheck();
	await settings.getByTestId('channel-duty.page-voice').check();
	await settings.getByTestId('save-channels').click();
	await expect(settings.locator('#error-duty\\.page')).toContainText('at least two ways');
	await settings.getByTestId('channel-duty.page-sms').check();
	await settings.getByTestId('save-channels').click();
	await expect(settings.getByTestId('phone-done')).toContainText('How pages reach you is saved.');
	await duty.reload();
	await expect(duty.getByTestId('channel-duty.page-sms')).toBeChecked();
	await expect(duty.getByTestId('channel-duty.page-voice')).toBeChecked();
	for (const width of [1280, 390]) {
		await duty.setViewportSize({ width, height: 900 });
		await duty.getByTestId('phone-settings').screenshot({ path: `${SCREENS}/phone-settings-${width}.png` });
	}
	await duty.setViewportSize({ width: 1280, height: 900 });

	// The duty scientist watches the board; a notice arrives and pages them.
	await duty.goto('/');
	await expect(duty.getByTestId('live-status')).toHaveAttribute('data-status', 'live');
	const coordinator = await signedIn(browser, 'coordinator');
	eventId = await publishNightEvent(coordinator, SOURCE_ID);
	const card = duty.locator(`[data-event-id="${eventId}"]`);
	await expect(card.getByTestId('ack')).toHaveAttribute('data-ack', 'open', { timeout: 30_000 });

	const sms = await newestPhone(NUMBER, 'sms', SOURCE_ID);
	const call = await newestPhone(NUMBER, 'voice', SOURCE_ID.split('').join(' '));
	const replyCode = /reply ([A-Z0-9]{6})/.exec(sms.text)![1];
	expect(call.text).toContain(`code ${replyCode.split('').join(' ')}`);

	// The fake's log, for administrators: the text and the spoken message, the link's secret masked.
	const admin = await signedIn(browser, 'admin');
	await admin.goto('/mailbox');
	await admin.getByTestId('phone-log-link').click();
	await expect(admin).toHaveURL(/\/phone-log$/);
	const texts = admin.getByTestId('phone-record').filter({ hasText: SOURCE_ID });
	await expect(texts.and(admin.locator('[data-type="sms"]'))).toContainText(`reply ${replyCode}`);
	await expect(texts.and(admin.locator('[data-type="sms"]'))).toContainText('/ack/••••••');
	await expect(admin.locator('[data-type="voice"]').filter({ hasText: SOURCE_ID.split('').join(' ') })).toContainText('Spoken:');
	for (const width of [1280, 390]) {
		await admin.setViewportSize({ width, height: 900 });
		await admin.screenshot({ path: `${SCREENS}/phone-log-${width}.png` });
	}

	// Following the link from the text, signed out: opening it asks, confirming acknowledges.
	const link = new URL(/https?:\/\/\S+\/ack\/[A-Za-z0-9_-]+/.exec(sms.text)![0]).pathname;
	const outside = await (await browser.newContext()).newPage();
	await outside.goto(link);
	await expect(outside.getByTestId('ack-offer')).toContainText(SOURCE_ID);
	await expect(card.getByTestId('ack')).toHaveAttribute('data-ack', 'open');
	await outside.getByTestId('confirm-ack').click();
	await expect(outside.getByTestId('acknowledged')).toContainText(`${SOURCE_ID} is acknowledged by ${demo('duty').name}`);
	// The board the duty scientist is looking at changes without a reload.
	await expect(card.getByTestId('ack')).toHaveAttribute('data-ack', 'acknowledged', { timeout: 15_000 });
	await expect(card.getByTestId('ack')).toContainText(`Acknowledged by ${demo('duty').name}`);

	// Once only: the link again is refused, on the page and to a bare POST.
	expect((await outside.goto(link))!.status()).toBe(409);
	await expect(outside.getByTestId('error-page')).toContainText('already used');
	const again = await outside.request.post(link, { form: {}, headers: { origin: new URL(outside.url()).origin, accept: 'text/html' } });
	expect(again.status()).toBe(409);
	// The reply code went with it: the fake's signed reply reaches the hook, which refuses it.
	await admin.setViewportSize({ width: 1280, height: 900 });
	await admin.getByTestId('reply-from').fill(NUMBER);
	await admin.getByTestId('reply-body').fill(`ok ${replyCode}`);
	await admin.getByTestId('send-reply').click();
	await expect(admin.getByTestId('reply-result')).toContainText('Hook answered 409');
	await expect(admin.getByTestId('reply-result')).toContainText('already used');

	// The event's duty pages show each channel's delivery.
	await duty.goto(`/events/${eventId}`);
	const row = duty.getByTestId('pages').locator('tr').filter({ hasText: demo('duty').name });
	for (const c of ['email', 'sms', 'voice']) await expect(row.getByTestId(`delivery-${c}`)).toContainText('sent');
	await duty.getByTestId('pages').screenshot({ path: `${SCREENS}/phone-duty-pages.png` });
});

test('hostile input to the phone paths gets a clear 4xx', async ({ browser, request }) => {
	// A forged inbound-hook signature.
	const forged = await request.post('/api/v1/phone/inbound', {
		form: { From: NUMBER, To: '+15005550006', Body: 'ok ACDEFG', MessageSid: 'SMforged' },
		headers: { 'x-twilio-signature': 'bm90LWEtc2lnbmF0dXJl' }
	});
	expect(forged.status()).toBe(403);
	expect(((await forged.json()) as { error: { message: string } }).error.message).toContain('signature does not match');
	// Not form-encoded, as the service never sends.
	const json = await request.post('/api/v1/phone/inbound', { data: { From: NUMBER } });
	expect(json.status()).toBe(415);
	// A made-up acknowledgement link.
	const bogus = await request.get('/ack/bm90LWEtdmFsaWQtdG9rZW4');
	expect(bogus.status()).toBe(400);
	expect(await bogus.text()).toContain('acknowledgement link is not valid');

	// An oversized text and a bad number in the fake's reply form; an over-long number on the account page.
	const admin = await signedIn(browser, 'admin');
	await admin.goto('/phone-log');
	await admin.getByTestId('reply-from').fill('not a number');
	await admin.getByTestId('reply-body').fill('x'.repeat(1700));
	await admin.getByTestId('send-reply').click();
	await expect(admin.getByText('A text has at most 1600 characters.')).toBeVisible();
	await admin.getByTestId('reply-body').fill('hello');
	await admin.getByTestId('send-reply').click();
	await expect(admin.getByText('Give the number in international form')).toBeVisible();
	const long = await admin.request.post('/account?/phone', { form: { section: 'phone', phone: '+3'.padEnd(60, '1') }, headers: { origin: new URL(admin.url()).origin, accept: 'text/html' } });
	expect(long.status()).toBe(400);
});
