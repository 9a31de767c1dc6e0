/**
 * Fake alert broker, standalone: `npm run broker -- [options]`.
 *
 *   --vtp-port N      VTP (TCP) port, default 8099
 *   --http-port N     HTTP port for sky maps and the notice archive, default 8098
 *   --host H          address to listen on, default 127.0.0.1
 *   --scenario NAME   a scenario in fake-alert-broker/scenarios/, or "all" (default)
 *   --speed X         play X times faster than the scenario's delays (default 1)
 *   --seed N          seed for the map jitter (default 1)
 *   --once            play once, wait for acks, then exit
 *   --loop            play again and again (each cycle gets new event ids)
 *   --iamalive S      seconds between keep-alives (default 60)
 *   --format F        voevent (default: XML over VTP) or json (JSON notices with their maps
 *                     inside, in the HTTP archive only: VTP carries XML; subscribers poll it)
 *   --write DIR       write the scenario's notices (and, for VOEvents, sky maps) into DIR and exit
 *   --list            list the scenarios and exit
 */
import { parseArgs } from 'node:util';
import { startBroker } from './broker.ts';
import { listScenarios, loadScenario, writeScenario } from './scenarios.ts';

function num(value: string | undefined, name: string, fallback: number, min = 0): number {
	if (value === undefined) return fallback;
	const n = Number(value);
	if (!Number.isFinite(n) || n < min) throw new Error(`--${name} must be a number ≥ ${min}, got "${value}"`);
	return n;
}

async function main(): Promise<void> {
	const { values } = parseArgs({
		options: {
			'vtp-port': { type: 'string' },
			'http-port': { type: 'string' },
			host: { type: 'string' },
			scenario: { type: 'string' },
			speed: { type: 'string' },
			seed: { type: 'string' },
			once: { type: 'boolean' },
			loop: { type: 'boolean' },
			iamalive: { type: 'string' },
			write: { type: 'string' },
			format: { type: 'string' },
			list: { type: 'boolean' },
			help: { type: 'boolean', short: 'h' }
		},
		strict: true
	});
	if (values.help) {
		process.stdout.write(
			'usage: npm run broker -- [--vtp-port N] [--http-port N] [--host H] [--scenario NAME|all] [--speed X] [--seed N] [--once|--loop] [--iamalive S] [--format voevent|json] [--write DIR] [--list]\n'
		);
		return;
	}
	if (values.list) {
		for (const n of listScenarios()) process.stdout.write(`${n}\t${loadScenario(n).description}\n`);
		return;
	}
	if (values.once && values.loop) throw new Error('--once and --loop exclude each other');
	const scenario = values.scenario ?? 'all';
	const speed = num(values.speed, 'speed', 1, 1e-3);
	const seed = Math.floor(num(values.seed, 'seed', 1));
	const vtpPort = Math.floor(num(values['vtp-port'], 'vtp-port', 8099));
	const httpPort = Math.floor(num(values['http-port'], 'http-port', 8098));
	const host = values.host ?? '127.0.0.1';
	const format = values.format ?? 'voevent';
	if (format !== 'voevent' && format !== 'json') throw new Error(`--format must be voevent or json, got "${format}"`);

	if (values.write) {
		const names = scenario === 'all' ? listScenarios() : [scenario];
		const httpBase = `http://${host}:${httpPort}`;
		for (const n of names) {
			const files = writeScenario(n, `${values.write}/${n}`, { epoch: new Date(), httpBase, seed, speed, format });
			process.stdout.write(`${n}: wrote ${files.length} files\n`);
		}
		return;
	}

	const broker = await startBroker({
		host,
		vtpPort,
		httpPort,
		iamaliveIntervalMs: num(values.iamalive, 'iamalive', 60, 0.1) * 1000,
		log: (m) => process.stdout.write(`[broker ${new Date().toISOString()}] ${m}\n`)
	});
	const abort = new AbortController();
	const shutdown = async () => {
		abort.abort();
		await broker.stop();
		process.exit(0);
	};
	process.on('SIGINT', shutdown);
	process.on('SIGTERM', shutdown);

	await broker.play(scenario, { speed, seed, loop: values.loop, signal: abort.signal, format });
	if (values.once) {
		await broker.stop();
		return;
	}
	process.stdout.write(`[broker] scenario "${scenario}" played; still serving maps and the archive (Ctrl-C to stop)\n`);
}

main().catch((e) => {
	process.stderr.write(`fake-alert-broker: ${(e as Error).message}\n`);
	process.exitCode = 1;
});
