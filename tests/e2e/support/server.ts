/** Start the built app for the browser tests on a fresh, seeded database. */
import { rmSync, existsSync } from 'node:fs';
import { spawn, spawnSync } from 'node:child_process';
import { openDatabase } from '../../../src/lib/server/platform/db';
import { seedDemo } from '../../../seeds/demo';
import { startE2eBroker } from './broker';
import { appProcessEnv } from '../../../src/lib/server/platform/app-process.ts';

const file = process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite';
for (const suffix of ['', '-wal', '-shm']) rmSync(file + suffix, { force: true });
// The mail catcher's and the fake phone service's files of earlier runs (see support/mail.ts, support/phone.ts).
rmSync(`${process.env.STORAGE_DIR ?? 'tests/e2e/.artifacts/storage'}/mail`, { recursive: true, force: true });
rmSync(`${process.env.STORAGE_DIR ?? 'tests/e2e/.artifacts/storage'}/phone`, { recursive: true, force: true });
await seedDemo(openDatabase(file));

if (!existsSync('build/handler.js')) {
	const built = spawnSync('npx', ['vite', 'build', '--logLevel', 'warn'], { stdio: 'inherit' });
	if (built.status !== 0) process.exit(1);
}
// The app listens to a fake broker that stays silent until a test publishes (see broker.ts).
const broker = await startE2eBroker((m) => console.log(`[e2e broker] ${m}`));
const app = spawn('node', ['server.js'], { stdio: 'inherit', env: appProcessEnv({ STORAGE_DIR: 'tests/e2e/.artifacts/storage', ...process.env, ...broker.env }) });
const stop = () => {
	app.kill('SIGTERM');
	void broker.stop();
};
process.on('SIGTERM', stop);
process.on('SIGINT', stop);
app.on('exit', (code) => process.exit(code ?? 0));
