/**
 * `strainline notice FILE.xml` — parse a VOEvent notice and print it (see docs/notice-format.md).
 */
import { readFileSync, statSync } from 'node:fs';
import type { CommandModule } from '../strainline.ts';
import { DEFAULT_MAX_NOTICE_BYTES, describeNotice, parseVoevent } from '../../lib/alerts/voevent.ts';

const command: CommandModule = {
	summary: 'Parse a VOEvent 2.0 notice and print the fields Strainline reads from it.',
	usage: 'FILE.xml [--max-bytes N] [--json]',
	options: { 'max-bytes': { type: 'string' } },
	async run(positionals, values) {
		if (positionals.length !== 1) throw new Error('expected exactly one FILE.xml');
		const file = positionals[0];
		let maxBytes = DEFAULT_MAX_NOTICE_BYTES;
		if (values['max-bytes'] !== undefined) {
			maxBytes = Number(values['max-bytes']);
			if (!Number.isInteger(maxBytes) || maxBytes < 1) throw new Error(`--max-bytes must be a positive integer`);
		}
		let size: number;
		try {
			const st = statSync(file);
			if (!st.isFile()) throw new Error('not a regular file');
			size = st.size;
		} catch (e) {
			throw new Error(`cannot read ${file}: ${(e as Error).message}`);
		}
		// Refuse by size before reading a huge file into memory.
		if (size > maxBytes) throw new Error(`${file}: notice is ${size} bytes, larger than the ${maxBytes}-byte limit`);
		const notice = parseVoevent(readFileSync(file), { maxBytes });
		return { json: notice, text: describeNotice(notice) };
	}
};

export default command;
