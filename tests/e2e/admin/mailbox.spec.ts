import { test, expect } from '@playwright/test';
import nodemailer from 'nodemailer';
import { signInAs } from '../support/people';

test('the development mailbox is for administrators only', async ({ page }) => {
	await signInAs(page, 'coordinator');
	await expect(page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Mailbox' })).toHaveCount(0);
	const response = await page.goto('/mailbox');
	expect(response?.status()).toBe(403);
	await expect(page.getByTestId('error-page')).toContainText('Not for your role');
});

test("the mailbox never shows another person's reset link", async ({ page, browser }) => {
	// Someone asks for a reset of the coordinator's account.
	const guest = await (await browser.newContext()).newPage();
	await guest.goto('/reset');
	await guest.getByLabel('E-mail').fill('coordinator@strainline.demo');
	await guest.getByRole('button', { name: 'Send me a link' }).click();
	await expect(guest.getByTestId('form-message')).toContainText('on its way');

	await signInAs(page, 'admin');
	await page.goto('/mailbox');
	const reset = page.getByTestId('mail').filter({ hasText: 'coordinator@strainline.demo' }).filter({ hasText: 'Reset your Strainline password' }).first();
	await expect(reset).toBeVisible();
	await expect(reset).toContainText('/reset/');
	await expect(reset.locator('a[href*="/reset/"]')).toHaveCount(0);
	// Neither shown nor anywhere in the page's data.
	expect(await page.content()).not.toMatch(/\/reset\/[a-z0-9]{16,}/);
});

test('a crafted link sent to the mail catcher stays text and gains no attributes', async ({ page }) => {
	await signInAs(page, 'admin');
	await page.goto('/mailbox');
	// Anything may be sent to the catcher's port: here a link built to break out of its attribute.
	const port = Number((await page.getByTestId('mailbox-port').innerText()).trim());
	const crafted = 'https://example.test/"onfocus="window.__mailboxXss=1"autofocus="';
	await nodemailer
		.createTransport({ host: '127.0.0.1', port, secure: false, ignoreTLS: true })
		.sendMail({ from: 'someone@example.test', to: 'admin@strainline.demo', subject: 'Crafted link', text: `Look here: ${crafted} and <b>bold</b>` });
	await page.reload();

	const mail = page.getByTestId('mail').filter({ hasText: 'Crafted link' }).first();
	await expect(mail).toContainText('<b>bold</b>');
	await expect(mail).toContainText('onfocus=');
	await expect(mail.locator('a')).toHaveCount(1);
	await expect(mail.locator('a[onfocus], a[autofocus], b')).toHaveCount(0);
	expect(await page.evaluate(() => (window as unknown as { __mailboxXss?: number }).__mailboxXss)).toBeUndefined();
	await page.screenshot({ path: 'test-results/screens/mailbox-admin.png', fullPage: true });
});

test('pages carry a content security policy with a nonce for their own scripts, and a permissions policy', async ({ page }) => {
	const response = await page.goto('/sign-in');
	const headers = response!.headers();
	const csp = headers['content-security-policy'] ?? '';
	expect(csp).toMatch(/script-src [^;]*'nonce-[A-Za-z0-9+/=]+'/);
	expect(csp).toContain("object-src 'none'");
	expect(csp).toContain("frame-ancestors 'none'");
	expect(csp).not.toMatch(/script-src [^;]*'unsafe-inline'/);
	expect(headers['permissions-policy']).toContain('camera=()');
	expect(headers['permissions-policy']).toContain('geolocation=()');
	// The theme script in the page head still runs under the policy.
	await page.evaluate(() => localStorage.setItem('strainline-theme', 'light'));
	await page.reload();
	await expect(page.locator('html')).toHaveAttribute('data-theme', 'light');
});
