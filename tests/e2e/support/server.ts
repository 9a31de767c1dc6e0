/** Start the built app for the browser tests on a fresh, seeded database. */
import { rmSync, existsSync } from 'node:fs';
import { spawn, spawnSync } from 'node:child_process';
import { openDatabase } from '../../../src/lib/server/db';
import { seedDemo } from '../../../seeds/demo';

const file = process.env.DATABASE_URL ?? 'tests/e2e/.artifacts/e2e.sqlite';
for (const suffix of ['', '-wal', '-shm']) rmSync(file + suffix, { force: true });
await seedDemo(openDatabase(file));

if (!existsSync('build/handler.js')) {
	const built = spawnSync('npx', ['vite', 'build', '--logLevel', 'warn'], { stdio: 'inherit' });
	if (built.status !== 0) process.exit(1);
}
const app = spawn('node', ['server.js'], { stdio: 'inherit', env: process.env });
const stop = () => app.kill('SIGTERM');
process.on('SIGTERM', stop);
process.on('SIGINT', stop);
app.on('exit', (code) => process.exit(code ?? 0));
