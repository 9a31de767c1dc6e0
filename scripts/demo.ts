/**
 * `npm run demo`: build the app, migrate and seed the invented demo collaboration, then start
 * the app (with its local fake SMTP server) on the embedded defaults. Ctrl-C stops everything.
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { existsSync } from 'node:fs';
import { openDatabase } from '../src/lib/server/db';
import { seedDemo } from '../seeds/demo';

const port = Number(process.env.PORT ?? 3000);
const origin = process.env.ORIGIN ?? `http://localhost:${port}`;
const env = { ...process.env, PORT: String(port), ORIGIN: origin, HOST: process.env.HOST ?? '127.0.0.1' };

if (!process.argv.includes('--no-build') || !existsSync('build/handler.js')) {
	console.log('Building the app…');
	const built = spawnSync('npx', ['vite', 'build', '--logLevel', 'warn'], { stdio: 'inherit', env });
	if (built.status !== 0) process.exit(built.status ?? 1);
}

const { created } = await seedDemo(openDatabase(env.DATABASE_URL || undefined));
console.log(created ? 'Seeded the demo collaboration (invented data).' : 'Demo collaboration already seeded.');

const children: ChildProcess[] = [];
function start(name: string, command: string, args: string[]) {
	const child = spawn(command, args, { stdio: ['ignore', 'inherit', 'inherit'], env });
	child.on('exit', (code) => {
		console.log(`${name} exited (${code})`);
		shutdown(code ?? 0);
	});
	children.push(child);
}

function shutdown(code = 0) {
	for (const c of children) if (c.exitCode === null) c.kill('SIGTERM');
	setTimeout(() => process.exit(code), 500).unref();
}
process.on('SIGINT', () => shutdown(0));
process.on('SIGTERM', () => shutdown(0));

start('app', 'node', ['server.js']);
console.log(`\nStrainline demo: ${origin}  (sign in as admin@strainline.demo / admin-demo-pass; see README for every role)\n`);
