#!/usr/bin/env node
/**
 * Strainline command-line tool. Each command lives in ./commands/<name>.ts and exports
 * `run(argv: string[]): Promise<CommandResult>`; this file only dispatches and formats.
 * Output shapes are fixed by docs/cli.md (keep them stable).
 */
import { parseArgs, type ParseArgsConfig } from 'node:util';
import { joinNegativeValues } from './args.ts';

export interface CommandResult {
	/** The JSON object printed with --json. */
	json: unknown;
	/** Human-readable rendering printed without --json. */
	text: string;
}

export interface CommandModule {
	summary: string;
	usage: string;
	options: NonNullable<ParseArgsConfig['options']>;
	run(positionals: string[], values: Record<string, string | boolean | undefined>): Promise<CommandResult>;
}

const commands: Record<string, () => Promise<CommandModule>> = {
	skymap: () => import('./commands/skymap.ts').then((m) => m.default),
	locate: () => import('./commands/locate.ts').then((m) => m.default),
	notice: () => import('./commands/notice.ts').then((m) => m.default),
	night: () => import('./commands/night.ts').then((m) => m.default),
	altaz: () => import('./commands/altaz.ts').then((m) => m.default),
	rank: () => import('./commands/rank.ts').then((m) => m.default),
	lightcurve: () => import('./commands/lightcurve.ts').then((m) => m.default),
	spectrum: () => import('./commands/spectrum.ts').then((m) => m.default)
};

function help(): string {
	return [
		'usage: strainline <command> [options] [--json]',
		'',
		'commands:',
		...Object.keys(commands).map((name) => `  ${name}`),
		'',
		'Run `strainline <command> --help` for the options of one command.'
	].join('\n');
}

async function main(argv: string[]): Promise<number> {
	const [name, ...rest] = argv;
	if (!name || name === '--help' || name === '-h') {
		process.stdout.write(help() + '\n');
		return name ? 0 : 2;
	}
	const load = commands[name];
	if (!load) {
		process.stderr.write(`strainline: unknown command "${name}" (try --help)\n`);
		return 2;
	}
	let mod: CommandModule;
	try {
		mod = await load();
	} catch (e) {
		process.stderr.write(`strainline: command "${name}" is not available: ${(e as Error).message}\n`);
		return 2;
	}
	let parsed;
	try {
		parsed = parseArgs({
			args: joinNegativeValues(rest),
			allowPositionals: true,
			strict: true,
			options: { ...mod.options, json: { type: 'boolean' }, help: { type: 'boolean', short: 'h' } }
		});
	} catch (e) {
		process.stderr.write(`strainline ${name}: ${(e as Error).message}\n`);
		return 2;
	}
	if (parsed.values.help) {
		process.stdout.write(`${mod.summary}\nusage: strainline ${name} ${mod.usage}\n`);
		return 0;
	}
	try {
		const result = await mod.run(parsed.positionals, parsed.values as Record<string, string | boolean | undefined>);
		process.stdout.write(parsed.values.json ? JSON.stringify(result.json) + '\n' : result.text + '\n');
		return 0;
	} catch (e) {
		const message = (e as Error).message?.split('\n')[0] ?? String(e);
		process.stderr.write(`strainline ${name}: ${message}\n`);
		return 1;
	}
}

main(process.argv.slice(2)).then((code) => {
	process.exitCode = code;
});
