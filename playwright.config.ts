import { defineConfig } from '@playwright/test';

const PORT = Number(process.env.E2E_PORT ?? 4173);
export const BASE_URL = `http://localhost:${PORT}`;

export default defineConfig({
	testDir: 'tests/e2e',
	outputDir: 'test-results',
	fullyParallel: false,
	workers: 1,
	retries: 0,
	timeout: 30_000,
	expect: { timeout: 5_000 },
	reporter: [['list']],
	use: {
		baseURL: BASE_URL,
		screenshot: 'only-on-failure',
		trace: 'off',
		launchOptions: {
			executablePath: process.env.CHROMIUM_PATH ?? '/usr/bin/chromium',
			args: [
				'--no-sandbox',
				'--disable-gpu',
				'--disable-quic',
				'--no-first-run',
				'--disable-background-networking',
				'--disable-component-update',
				'--disable-sync'
			]
		}
	},
	webServer: {
		// The built app (npm test builds first) on a fresh database seeded with the demo scenario.
		command: 'npx tsx tests/e2e/support/server.ts',
		url: `${BASE_URL}/`,
		reuseExistingServer: false,
		timeout: 120_000,
		stdout: 'pipe',
		env: {
			PORT: String(PORT),
			ORIGIN: BASE_URL,
			DATABASE_URL: 'tests/e2e/.artifacts/e2e.sqlite',
			FAKE_SMTP_PORT: '0',
			FAKE_WEBHOOK_PORT: '0',
			FAKE_PHONE_PORT: '0',
			PHONE_ACCOUNT_SID: '',
			SMTP_URL: ''
		}
	}
});
