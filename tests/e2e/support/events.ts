/** Events of our own for the browser tests: a compact map opposite the Sun, so its targets are night targets today. */
import { expect, type Page } from '@playwright/test';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { generateSkymap, skymapToFits } from '../../../fake-alert-broker/skymap';
import { sunPosition } from '../../../src/lib/targeting/sun-moon';

const WORK = 'test-results/e2e-events';

/** The map's peak: opposite the Sun now, on the equator. */
export function nightPeak(): { raDeg: number; decDeg: number } {
	return { raDeg: (sunPosition({ latitudeDeg: 0, longitudeDeg: 0, elevationM: 0 }, new Date()).raDeg + 180) % 360, decDeg: 0 };
}

function skymapFile(sourceId: string, peak: { raDeg: number; decDeg: number } = nightPeak()): string {
	mkdirSync(WORK, { recursive: true });
	const fits = skymapToFits(generateSkymap({ components: [{ ...peak, widthDeg: 3 }], distance: { meanMpc: 118, stdMpc: 24 } }), {
		object: sourceId,
		dateObs: new Date().toISOString().slice(0, 23)
	});
	const path = `${WORK}/${sourceId}.multiorder.fits.gz`;
	writeFileSync(path, fits);
	return path;
}

/** The fixture notice, renamed and moved to now (merger 30 min ago) so that tonight's pointings are after it. */
export function noticeXml(sourceId: string): string {
	const merger = new Date(Date.now() - 30 * 60_000).toISOString();
	return readFileSync('tests/fixtures/notices/bns-initial.xml', 'utf8')
		.replaceAll('SX30041207', sourceId)
		.replace('2030-04-12T07:30:41.250Z', merger)
		.replace('2030-04-12T08:02:00Z', new Date().toISOString().slice(0, 19) + 'Z');
}

/** Publish the event through the upload page as the signed-in coordinator (its map peaks opposite the Sun unless `peak` says otherwise); returns its id. */
export async function publishNightEvent(coordinator: Page, sourceId: string, peak?: { raDeg: number; decDeg: number }): Promise<string> {
	await coordinator.goto('/events/upload');
	// Typing before hydration can be lost when the page hydrates under load: wait for it.
	await expect(coordinator.locator('[data-hydrated="yes"]')).toBeVisible();
	await coordinator.getByLabel('Notice XML').fill(noticeXml(sourceId));
	await coordinator.getByLabel('Sky map (optional)').setInputFiles(skymapFile(sourceId, peak));
	await coordinator.getByRole('button', { name: 'Submit the notice' }).click();
	await expect(coordinator.getByTestId('event-page')).toBeVisible({ timeout: 30_000 });
	return new URL(coordinator.url()).pathname.split('/')[2];
}
