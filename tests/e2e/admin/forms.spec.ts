import { test, expect } from '@playwright/test';
import { signInAs } from '../support/people';

test('the invitation form explains each bad field and keeps what was typed', async ({ page }) => {
	await signInAs(page, 'coordinator');
	await page.goto('/admin');
	const invite = page.locator('form[action="?/invite"]');
	await invite.getByRole('button', { name: 'Send the invitation' }).click();
	await expect(invite.getByTestId('error-email')).toHaveText('Enter an e-mail address.');
	await expect(invite.getByTestId('error-roles')).toHaveText('Choose at least one role.');

	await invite.getByLabel('E-mail').fill('not-an-address');
	await invite.getByRole('checkbox', { name: /^Observer/ }).check();
	await invite.getByRole('button', { name: 'Send the invitation' }).click();
	await expect(invite.getByTestId('error-email')).toHaveText('This is not a valid e-mail address.');
	await expect(invite.getByLabel('E-mail')).toHaveValue('not-an-address');
	await expect(invite.getByRole('checkbox', { name: /^Observer/ })).toBeChecked();

	// An observer must belong to a team: nothing is written, nothing is sent.
	await invite.getByLabel('E-mail').fill('teamless@example.test');
	await invite.getByRole('button', { name: 'Send the invitation' }).click();
	await expect(invite.getByTestId('error-teamIds')).toContainText('at least one telescope team');
	await expect(page.getByTestId('invitations')).not.toContainText('teamless@example.test');

	// An existing address is refused on the field.
	await invite.getByLabel('E-mail').fill('viewer@strainline.demo');
	await invite.getByRole('checkbox', { name: /^Observer/ }).uncheck();
	await invite.getByRole('checkbox', { name: /^Viewer/ }).check();
	await invite.getByRole('button', { name: 'Send the invitation' }).click();
	await expect(invite.getByTestId('error-email')).toContainText('already has an account');
	await page.screenshot({ path: 'test-results/screens/invite-errors.png', fullPage: true });
});

test('the team form refuses empty and duplicate names and keeps the region', async ({ page }) => {
	await signInAs(page, 'coordinator');
	await page.goto('/teams');
	const form = page.locator('form[action="?/create"]');
	await form.getByLabel('Region').fill('Antarctic plateau');
	await form.getByRole('button', { name: 'Create the team' }).click();
	await expect(form.getByTestId('error-name')).toHaveText('Enter a name.');
	await expect(form.getByLabel('Region')).toHaveValue('Antarctic plateau');
	await form.getByLabel('Name').fill('Karoo Wide Field');
	await form.getByRole('button', { name: 'Create the team' }).click();
	await expect(form.getByTestId('error-name')).toHaveText('A team with this name exists.');
	await form.getByLabel('Name').fill('Polar Night Crew');
	await form.getByRole('button', { name: 'Create the team' }).click();
	await expect(page.getByTestId('team-card').filter({ hasText: 'Polar Night Crew' })).toContainText('Antarctic plateau');
});

test('the change-password form refuses a wrong current password and a mismatch', async ({ page }) => {
	await signInAs(page, 'viewer');
	await page.goto('/account');
	await page.getByLabel('Current password').fill('not-it');
	await page.getByLabel('New password', { exact: true }).fill('another-good-pass');
	await page.getByLabel('Repeat the new password').fill('another-good-pass');
	await page.getByRole('button', { name: 'Change password' }).click();
	await expect(page.getByTestId('error-currentPassword')).toHaveText('The current password is not right.');
	await page.getByLabel('Current password').fill('viewer-demo-pass');
	await page.getByLabel('New password', { exact: true }).fill('another-good-pass');
	await page.getByLabel('Repeat the new password').fill('different-pass-x');
	await page.getByRole('button', { name: 'Change password' }).click();
	await expect(page.getByTestId('error-confirm')).toHaveText('The two passwords differ.');
});
