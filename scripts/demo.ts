/**
 * `npm run demo`: build the app, migrate and seed the invented demo collaboration (with a duty
 * roster around now), start the fake alert broker and the app (with its local fake SMTP
 * server), and once the app's listener has subscribed, play the broker's scenarios: the
 * neutron-star merger (preliminary, initial, update), a retraction, a black-hole merger, a
 * test event and a malformed notice. Ctrl-C stops everything.
 *
 *   npm run demo -- [--no-build] [--scenario NAME|all] [--speed X] [--loop]
 *                   [--vtp-port N] [--http-port N] [--format voevent|json]
 *
 * With `--format json` the broker publishes JSON notices (maps inside) to its HTTP archive
 * instead of VOEvents over VTP, and the app reads the archive every 5 s (VTP_ARCHIVE_POLL_S).
 *
 * At the default speed of 1 the neutron-star story takes about 85 s.
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { existsSync } from 'node:fs';
import { parseArgs } from 'node:util';
import { openDatabase } from '../src/lib/server/platform/db';
import { seedDemo, seedDemoWebhook } from '../seeds/demo';
import { startBroker } from '../fake-alert-broker/broker.ts';
import { appProcessEnv } from '../src/lib/server/platform/app-process.ts';

const { values: args } = parseArgs({
	options: {
		'no-build': { type: 'boolean' },
		scenario: { type: 'string', default: 'all' },
		speed: { type: 'string', default: '1' },
		loop: { type: 'boolean' },
		'vtp-port': { type: 'string', default: '8099' },
		'http-port': { type: 'string', default: '8098' },
		format: { type: 'string', default: 'voevent' }
	},
	strict: true
});
const speed = Number(args.speed);
if (!Number.isFinite(speed) || speed <= 0) throw new Error(`--speed must be a positive number, got "${args.speed}"`);
const format = args.format;
if (format !== 'voevent' && format !== 'json') throw new Error(`--format must be voevent or json, got "${args.format}"`);

const port = Number(process.env.PORT ?? 3000);
const origin = process.env.ORIGIN ?? `http://localhost:${port}`;
const env: NodeJS.ProcessEnv = { ...process.env, PORT: String(port), ORIGIN: origin, HOST: process.env.HOST ?? '127.0.0.1' };

if (!args['no-build'] || !existsSync('build/handler.js')) {
	console.log('Building the app…');
	const built = spawnSync('npx', ['vite', 'build', '--logLevel', 'warn'], { stdio: 'inherit', env });
	if (built.status !== 0) process.exit(built.status ?? 1);
}

const database = openDatabase(env.DATABASE_URL || undefined);
const { created } = await seedDemo(database);
console.log(created ? 'Seeded the demo collaboration (invented data).' : 'Demo collaboration already seeded.');

// A chat webhook to the app's local fake receiver, so that the alerts below show up on the webhook catcher.
// The port stored here is the one asked for; the app re-points it to the port the receiver actually gets.
env.FAKE_WEBHOOK_PORT ??= '2580';
if (env.FAKE_WEBHOOK_PORT.trim().toLowerCase() !== 'off') {
	const askedPort = Number(env.FAKE_WEBHOOK_PORT);
	if (!Number.isInteger(askedPort) || askedPort < 0 || askedPort > 65535) throw new Error(`FAKE_WEBHOOK_PORT must be a port number (0 for any free port) or "off", got "${env.FAKE_WEBHOOK_PORT}"`);
	seedDemoWebhook(database, askedPort);
}

const broker = await startBroker({
	host: '127.0.0.1',
	vtpPort: Number(args['vtp-port']),
	httpPort: Number(args['http-port']),
	log: (m) => console.log(`[broker] ${m}`)
});
env.VTP_BROKER = `127.0.0.1:${broker.vtpPort}`;
env.VTP_ARCHIVE_URL = broker.httpBase;
// JSON notices are not sent over VTP: the app reads them from the archive on a timer.
if (format === 'json') env.VTP_ARCHIVE_POLL_S ??= '5';

const children: ChildProcess[] = [];
const abort = new AbortController();
function start(name: string, command: string, argv: string[], childEnv: NodeJS.ProcessEnv = env) {
	const child = spawn(command, argv, { stdio: ['ignore', 'inherit', 'inherit'], env: childEnv });
	child.on('exit', (code) => {
		console.log(`${name} exited (${code})`);
		shutdown(code ?? 0);
	});
	children.push(child);
}

function shutdown(code = 0) {
	abort.abort();
	for (const c of children) if (c.exitCode === null) c.kill('SIGTERM');
	void broker.stop();
	setTimeout(() => process.exit(code), 500).unref();
}
process.on('SIGINT', () => shutdown(0));
process.on('SIGTERM', () => shutdown(0));

start('app', 'node', ['server.js'], appProcessEnv(env));
console.log(`\nStrainline demo: ${origin}`);
console.log('  duty scientist on shift: duty@strainline.demo / duty-demo-pass (pages arrive in /mailbox, as coordinator or admin)');
console.log('  the duty scientist (+1 202 555 0143) and the back-up coordinator (+1 202 555 0178) are also paged by text and voice: /phone-log (admin) shows the local fake messaging service, and replies from there');
console.log('  coordinator: coordinator@strainline.demo / coordinator-demo-pass; admin: admin@strainline.demo / admin-demo-pass');
console.log('  chat messages: /admin/webhooks (coordinator or admin); what the local fake receiver caught: /mailbox/webhooks (admin)\n');

// Play once the app listens, so that nobody misses the first notice (the archive would back-fill it anyway).
const until = Date.now() + 60_000;
while (broker.subscriberCount() === 0 && Date.now() < until && !abort.signal.aborted) await new Promise((r) => setTimeout(r, 250));
if (!abort.signal.aborted) {
	console.log(`[broker] playing "${args.scenario}" at speed ${speed}${args.loop ? ', looping' : ''}${format === 'json' ? ', as JSON notices in the archive' : ''}`);
	broker
		.play(args.scenario!, { speed, loop: args.loop, signal: abort.signal, format })
		.then(() => {
			if (!abort.signal.aborted) console.log(`[broker] scenario "${args.scenario}" played; still serving sky maps and the archive`);
		})
		.catch((e: Error) => console.error(`[broker] ${e.message}`));
}
