import { test, expect } from '@playwright/test';
import { signInAs } from '../support/people';

test('the telescope form gives field-level messages, keeps what was typed, and writes nothing half-done', async ({ page }) => {
	await signInAs(page, 'coordinator');
	await page.goto('/telescopes/new');
	await page.getByLabel('Name').fill('Test Reflector 0.5 m');
	await page.getByLabel('Latitude (°, north positive)').fill('95');
	await page.getByLabel('Longitude (°, east positive)').fill('west');
	await page.getByLabel('Field width (°)').fill('0');
	await page.getByLabel('Filters').fill('g, r');
	await page.getByRole('button', { name: 'Add the telescope' }).click();
	await expect(page.getByTestId('error-latitudeDeg')).toContainText('between -90 and 90');
	await expect(page.getByTestId('error-longitudeDeg')).toContainText('must be a number');
	await expect(page.getByTestId('error-fovWidthDeg')).toContainText('greater than 0');
	await expect(page.getByTestId('error-teamId')).toContainText('Choose a team');
	await expect(page.getByTestId('error-siteName')).toContainText('Enter the site');
	await expect(page.getByLabel('Name')).toHaveValue('Test Reflector 0.5 m');
	await expect(page.getByLabel('Latitude (°, north positive)')).toHaveValue('95');
	await expect(page.getByLabel('Filters')).toHaveValue('g, r');
	await page.screenshot({ path: 'test-results/screens/telescope-errors.png', fullPage: true });

	await page.goto('/telescopes');
	await expect(page.getByTestId('telescopes-table')).not.toContainText('Test Reflector');

	await page.goto('/telescopes/new');
	await page.getByLabel('Name').fill('Test Reflector 0.5 m');
	await page.getByLabel('Team').selectOption({ label: 'Karoo Wide Field' });
	await page.getByLabel('Site').fill('Test ridge');
	await page.getByLabel('Elevation (m)').fill('1500');
	await page.getByLabel('Latitude (°, north positive)').fill('-32.5');
	await page.getByLabel('Longitude (°, east positive)').fill('20.5');
	await page.getByLabel('Aperture (m)').fill('0.5');
	await page.getByLabel('Field width (°)').fill('0.6');
	await page.getByLabel('Field height (°)').fill('0.4');
	await page.getByLabel('Filters').fill('g, r');
	await page.getByLabel('Typical limiting magnitude').fill('19.5');
	await page.getByLabel('…in an exposure of (s)').fill('120');
	await page.getByRole('button', { name: 'Add the telescope' }).click();
	await expect(page).toHaveURL(/\/telescopes$/);
	const row = page.getByTestId('telescopes-table').locator('tr', { hasText: 'Test Reflector 0.5 m' });
	await expect(row).toContainText('0.6° × 0.4°');
	await expect(row).toContainText('32.50° S');
	await page.screenshot({ path: 'test-results/screens/telescopes.png', fullPage: true });
});

test('an admin issues a telescope token (shown once) and revokes it', async ({ page, request }) => {
	await signInAs(page, 'admin');
	await page.goto('/admin/tokens');
	await page.getByLabel('Name').fill('robot feed');
	await page.getByLabel('Held by').selectOption({ label: 'Saguaro 0.8 m' });
	await page.getByRole('button', { name: 'Issue' }).click();
	const secret = (await page.getByTestId('token-secret').textContent())!.trim();
	expect(secret).toMatch(/^stl_[a-z2-7]{30,}$/);
	const me = await request.get('/api/v1/me', { headers: { authorization: `Bearer ${secret}` } });
	expect(me.status()).toBe(200);
	expect((await me.json()).telescope.name).toBe('Saguaro 0.8 m');

	await page.reload();
	await expect(page.getByTestId('tokens-table')).not.toContainText(secret);
	await page.getByTestId('tokens-table').locator('tr', { hasText: 'robot feed' }).getByRole('button', { name: 'revoke' }).click();
	await expect(page.getByTestId('tokens-table').locator('tr', { hasText: 'robot feed' })).toContainText('revoked');
	const after = await request.get('/api/v1/me', { headers: { authorization: `Bearer ${secret}` } });
	expect(after.status()).toBe(401);
	expect(await after.json()).toEqual({ error: { code: 'invalid_token', message: expect.any(String) } });
});
