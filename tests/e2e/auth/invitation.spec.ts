import { test, expect } from '@playwright/test';
import { signIn, signInAs } from '../support/people';
import { linkIn, newestMail } from '../support/mail';

test('an admin invites a person, the mail arrives, the invitee joins and sees only what the role allows', async ({ browser }) => {
	const adminCtx = await browser.newContext();
	const admin = await adminCtx.newPage();
	await signInAs(admin, 'admin');
	await admin.getByRole('link', { name: 'Admin' }).click();
	const invite = admin.locator('form[action="?/invite"]');
	await invite.getByLabel('E-mail').fill('nadia.quist@example.test');
	await invite.getByRole('checkbox', { name: /^Observer/ }).check();
	await invite.getByLabel('Karoo Wide Field').check();
	await invite.getByRole('button', { name: 'Send the invitation' }).click();
	await expect(admin.getByTestId('form-done')).toContainText('nadia.quist@example.test');

	// The message the fake SMTP server actually received: the mailbox shows it with the secret part
	// of the link masked; the full text is only on the server's disk.
	await admin.getByRole('link', { name: 'Mailbox' }).click();
	const mail = admin.getByTestId('mail').filter({ hasText: 'nadia.quist@example.test' }).first();
	await expect(mail).toContainText('You are invited to Strainline');
	await expect(mail.locator('a[href*="/invitation/"]')).toHaveCount(0);
	const link = linkIn(await newestMail('nadia.quist@example.test', 'You are invited'), '/invitation/');
	await expect(mail).not.toContainText(link);
	await admin.screenshot({ path: 'test-results/screens/mailbox.png', fullPage: true });

	const guestCtx = await browser.newContext();
	const guest = await guestCtx.newPage();
	await guest.goto(link);
	await expect(guest.getByText('nadia.quist@example.test')).toBeVisible();
	// Bad input first: a short password and a mismatch keep the typed name.
	await guest.getByLabel('Your name').fill('Nadia Quist');
	await guest.getByLabel('Password', { exact: true }).fill('short');
	await guest.getByLabel('Repeat the password').fill('other');
	await guest.getByRole('button', { name: 'Create my account' }).click();
	await expect(guest.getByTestId('error-password')).toContainText('at least 10');
	await expect(guest.getByLabel('Your name')).toHaveValue('Nadia Quist');
	await guest.getByLabel('Password', { exact: true }).fill('nadia-secret-pass');
	await guest.getByLabel('Repeat the password').fill('nadia-secret-pass');
	await guest.getByRole('button', { name: 'Create my account' }).click();
	await expect(guest).toHaveURL(/\/$/);
	await expect(guest.getByRole('heading', { name: 'Active events' })).toBeVisible();
	await expect(guest.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Admin' })).toHaveCount(0);
	await guest.goto('/admin');
	await expect(guest.getByTestId('error-page')).toContainText('Not for your role');

	// The link is single use.
	const again = await browser.newContext();
	const againPage = await again.newPage();
	await againPage.goto(link);
	await expect(againPage.getByTestId('form-message')).toContainText('no longer valid');

	// And the new person can sign in with the chosen password.
	const fresh = await (await browser.newContext()).newPage();
	await signIn(fresh, 'nadia.quist@example.test', 'nadia-secret-pass');
	await expect(fresh.getByTestId('user-menu')).toContainText('Nadia Quist');
});

test('a wrong password shows a clear error and keeps the e-mail', async ({ page }) => {
	await page.goto('/sign-in');
	await page.getByLabel('E-mail').fill('viewer@strainline.demo');
	await page.getByLabel('Password').fill('not-the-password');
	await page.getByRole('button', { name: 'Sign in' }).click();
	await expect(page.getByTestId('error-password')).toHaveText('Wrong e-mail or password.');
	await expect(page.getByLabel('E-mail')).toHaveValue('viewer@strainline.demo');
});

test('a viewer cannot reach the admin pages and gets a 403 page, not a crash', async ({ page }) => {
	await signInAs(page, 'viewer');
	for (const path of ['/admin', '/admin/tokens', '/telescopes/new', '/mailbox']) {
		const response = await page.goto(path);
		expect(response?.status(), path).toBe(403);
		await expect(page.getByTestId('error-page')).toContainText('Not for your role');
	}
	await page.screenshot({ path: 'test-results/screens/viewer-403.png' });
});

test('signed out, app pages send you to sign in and come back after', async ({ page }) => {
	await page.goto('/telescopes');
	await expect(page).toHaveURL(/\/sign-in\?next=%2Ftelescopes/);
	await page.getByLabel('E-mail').fill('observer@strainline.demo');
	await page.getByLabel('Password').fill('observer-demo-pass');
	await page.getByRole('button', { name: 'Sign in' }).click();
	await expect(page).toHaveURL(/\/telescopes$/);
	await expect(page.getByTestId('telescopes-table')).toContainText('Karoo Schmidt 1.0 m');
});

test('password reset by e-mail', async ({ browser }) => {
	const page = await (await browser.newContext()).newPage();
	await page.goto('/reset');
	await page.getByLabel('E-mail').fill('spectro@strainline.demo');
	await page.getByRole('button', { name: 'Send me a link' }).click();
	await expect(page.getByTestId('form-message')).toContainText('on its way');

	const link = linkIn(await newestMail('spectro@strainline.demo', 'Reset your Strainline password'), '/reset/');
	await page.goto(link);
	await page.getByLabel('New password').fill('spectro-new-pass-1');
	await page.getByLabel('Repeat the password').fill('spectro-new-pass-1');
	await page.getByRole('button', { name: 'Set the new password' }).click();
	await expect(page).toHaveURL(/sign-in\?reset=done/);
	await signIn(page, 'spectro@strainline.demo', 'spectro-new-pass-1');
	// Put the documented demo password back for the other tests.
	await page.goto('/account');
	await page.getByLabel('Current password').fill('spectro-new-pass-1');
	await page.getByLabel('New password', { exact: true }).fill('spectro-demo-pass');
	await page.getByLabel('Repeat the new password').fill('spectro-demo-pass');
	await page.getByRole('button', { name: 'Change password' }).click();
	await expect(page.getByTestId('form-done')).toContainText('Password changed');
});

test('sessions list and sign out everywhere', async ({ browser }) => {
	const a = await (await browser.newContext()).newPage();
	const b = await (await browser.newContext()).newPage();
	await signInAs(a, 'duty');
	await signInAs(b, 'duty');
	await a.goto('/account');
	expect(await a.getByTestId('sessions').locator('tbody tr').count()).toBeGreaterThanOrEqual(2);
	await a.getByRole('button', { name: 'Sign out everywhere' }).click();
	await expect(a).toHaveURL(/sign-in/);
	await b.goto('/account');
	await expect(b).toHaveURL(/sign-in/);
});

test('the shell shows the live connection', async ({ page }) => {
	await signInAs(page, 'coordinator');
	await expect(page.getByTestId('live-status')).toHaveAttribute('data-status', 'live');
});
