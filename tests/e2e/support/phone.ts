import { expect } from '@playwright/test';
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';

/**
 * Where the app's fake messaging service writes each text and call it receives, whole (the phone
 * log page masks the secret part of acknowledgement links; these files do not).
 */
export const PHONE_DIR = join(process.env.STORAGE_DIR ?? 'tests/e2e/.artifacts/storage', 'phone');

export interface CaughtPhone {
	type: 'sms' | 'voice';
	direction: 'outbound' | 'inbound';
	to: string;
	text: string;
}

function readAll(): CaughtPhone[] {
	let names: string[];
	try {
		names = readdirSync(PHONE_DIR).filter((n) => n.endsWith('.json'));
	} catch {
		return [];
	}
	return names
		.sort()
		.reverse()
		.map((n) => JSON.parse(readFileSync(join(PHONE_DIR, n), 'utf8')) as CaughtPhone);
}

/** The newest outbound text or call to `to` whose text holds `holding` (waits up to 10 s for it). */
export async function newestPhone(to: string, type: 'sms' | 'voice', holding: string): Promise<CaughtPhone> {
	let found: CaughtPhone | undefined;
	await expect
		.poll(() => (found = readAll().find((m) => m.direction === 'outbound' && m.type === type && m.to === to && m.text.includes(holding))), { timeout: 10_000 })
		.toBeTruthy();
	return found!;
}
