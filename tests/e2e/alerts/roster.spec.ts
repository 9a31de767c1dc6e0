import { test, expect } from '@playwright/test';
import { signInAs, demo } from '../support/people';

test('a coordinator adds a shift with checked input, and the person on shift writes the hand-over note', async ({ page, browser }) => {
	await signInAs(page, 'coordinator');
	await page.getByRole('link', { name: 'Roster' }).first().click();
	await expect(page.getByRole('heading', { name: 'Duty roster' })).toBeVisible();
	// The seeded roster: the duty scientist on shift now, the coordinator as back-up.
	const current = page.locator('[data-testid="shift"][data-current="yes"]');
	await expect(current).toHaveCount(2);
	await expect(current.first()).toContainText(demo('duty').name);

	const day = new Date(Date.now() + 2 * 86_400_000).toISOString().slice(0, 10);
	const add = page.locator('form[action="?/add"]');
	// Someone who cannot acknowledge alerts is refused, and so is a shift that ends before it starts.
	await add.getByLabel('Person').selectOption({ label: demo('duty').name });
	await add.getByLabel('Start (UTC)').fill(`${day}T08:00`);
	await add.getByLabel('End (UTC)').fill(`${day}T07:00`);
	await add.getByRole('button', { name: 'Add the shift' }).click();
	await expect(page.getByTestId('error-endsAt')).toContainText('end after it starts');
	await expect(add.getByLabel('Start (UTC)')).toHaveValue(`${day}T08:00`);
	await expect(add.getByLabel('Person').locator('option', { hasText: demo('viewer').name })).toHaveCount(0);
	await add.getByLabel('End (UTC)').fill(`${day}T20:00`);
	await add.getByRole('button', { name: 'Add the shift' }).click();
	await expect(page.getByTestId('form-done')).toContainText('Shift added.');
	const added = page.locator('[data-testid="shift"]').filter({ hasText: `${day} 08:00` });
	await expect(added).toHaveCount(1);
	await expect(added).toContainText(`${day} 20:00`);

	// The duty scientist writes the note on their own current shift, and cannot edit others'.
	const ctx = await browser.newContext();
	const duty = await ctx.newPage();
	await signInAs(duty, 'duty');
	await duty.goto('/roster');
	const mine = duty.locator('[data-testid="shift"][data-current="yes"]').filter({ hasText: demo('duty').name });
	await mine.getByRole('textbox').fill('Quiet night; the update for the test event is still due.');
	await mine.getByRole('button', { name: 'Save' }).click();
	await expect(duty.getByTestId('form-done')).toContainText('Hand-over note saved.');
	const others = duty.locator('[data-testid="shift"][data-current="yes"]').filter({ hasText: demo('coordinator').name });
	await expect(others.getByRole('textbox')).toHaveCount(0);
	await duty.reload();
	await expect(duty.locator('[data-testid="shift"][data-current="yes"]').filter({ hasText: demo('duty').name }).getByRole('textbox')).toHaveValue(
		'Quiet night; the update for the test event is still due.'
	);
	await ctx.close();

	await page.reload();
	await page.screenshot({ path: 'test-results/screens/roster.png', fullPage: true });
	await added.getByRole('button', { name: /Remove/ }).click();
	await expect(page.getByTestId('form-done')).toContainText('Shift removed.');
	await expect(added).toHaveCount(0);
});
