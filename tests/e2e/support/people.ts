import { expect, type Page } from '@playwright/test';
import { DEMO_PEOPLE } from '../../../seeds/scenario';

export const demo = (role: string) => {
	const p = DEMO_PEOPLE.find((x) => x.roles.includes(role as never));
	if (!p) throw new Error(`no demo person with role ${role}`);
	return p;
};

/** Sign in through the form, as a person would, and wait for the board to hydrate. */
export async function signIn(page: Page, email: string, password: string) {
	await page.goto('/sign-in');
	await page.getByLabel('E-mail').fill(email);
	await page.getByLabel('Password').fill(password);
	await page.getByRole('button', { name: 'Sign in' }).click();
	await expect(page).toHaveURL(/\/$/);
	await expect(page.locator('[data-hydrated="yes"]')).toBeVisible();
}

export async function signInAs(page: Page, role: string) {
	const p = demo(role);
	await signIn(page, p.email, p.password);
	return p;
}
