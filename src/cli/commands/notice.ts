/**
 * `strainline notice FILE` — read a notice, VOEvent XML or JSON (told by its content), and print
 * it (see docs/notice-format.md). Both formats print the same shape with --json; a JSON notice's
 * embedded sky map is summarised by its size, not printed.
 *
 * `--vocabulary FILE.json` reads it with a stream's vocabulary (the shape the notice-streams page
 * stores: `{ names: { field: [names…] }, farUnit, eventIdFromIvorn }`); `--with A.xml,B.xml` reads
 * other notices first, so that a notice naming its event only through the packets it cites can be
 * read as ingestion would read it after those packets arrived.
 */
import { readFileSync, statSync } from 'node:fs';
import type { CommandModule } from '../strainline.ts';
import { DEFAULT_MAX_NOTICE_BYTES, describeNotice, readVoevent, vocabularySchema, type NoticeVocabulary } from '../../lib/alerts/voevent.ts';
import { detectNoticeFormat, maxJsonNoticeBytes, parseJsonNotice } from '../../lib/alerts/notice-json.ts';

function readLimited(file: string, maxBytes: number): Buffer {
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
	return readFileSync(file);
}

function readVocabulary(file: string): NoticeVocabulary {
	let json: unknown;
	try {
		json = JSON.parse(readLimited(file, 64 * 1024).toString('utf8'));
	} catch (e) {
		throw new Error(`--vocabulary ${file}: ${(e as Error).message}`);
	}
	const checked = vocabularySchema.safeParse(json);
	if (!checked.success) {
		const issue = checked.error.issues[0];
		throw new Error(`--vocabulary ${file}: ${issue.path.join('.') || '(root)'}: ${issue.message}`);
	}
	return checked.data;
}

const command: CommandModule = {
	summary: 'Parse a notice (VOEvent 2.0 XML or JSON) and print the fields Strainline reads from it.',
	usage: 'FILE.xml|FILE.json [--vocabulary STREAM.json] [--with CITED.xml[,CITED.xml…]] [--max-bytes N] [--json]',
	options: { 'max-bytes': { type: 'string' }, vocabulary: { type: 'string' }, with: { type: 'string' } },
	async run(positionals, values) {
		if (positionals.length !== 1) throw new Error('expected exactly one FILE.xml or FILE.json');
		const file = positionals[0];
		let maxBytes = DEFAULT_MAX_NOTICE_BYTES;
		if (values['max-bytes'] !== undefined) {
			maxBytes = Number(values['max-bytes']);
			if (!Number.isInteger(maxBytes) || maxBytes < 1) throw new Error(`--max-bytes must be a positive integer`);
		}
		// A JSON notice may carry its sky map: it is allowed the notice limit plus the sky-map limit in base64.
		const whole = readLimited(file, maxJsonNoticeBytes({ maxBytes }));
		if (detectNoticeFormat(new TextDecoder('utf-8').decode(whole.subarray(0, 4096))) === 'json') {
			const { notice, embeddedSkymap } = parseJsonNotice(whole, { maxBytes });
			const extra = [
				notice.significant === undefined ? null : `  significant ${notice.significant ? 'yes' : 'no'} (sender's flag)`,
				notice.instruments ? `  instruments ${notice.instruments.join(', ')}` : null,
				embeddedSkymap ? `  sky map inside the notice, ${embeddedSkymap.byteLength} bytes (strainline skymap ${file})` : null
			].filter((l): l is string => l !== null);
			return { json: notice, text: [describeNotice(notice), ...extra].join('\n') };
		}
		if (whole.byteLength > maxBytes) throw new Error(`${file}: notice is ${whole.byteLength} bytes, larger than the ${maxBytes}-byte limit`);
		const vocabulary = typeof values.vocabulary === 'string' ? readVocabulary(values.vocabulary) : undefined;
		// IVORN → event of the notices given with --with, read in order (each may cite the ones before it).
		const known = new Map<string, string>();
		const citedEvent = (ivorn: string) => known.get(ivorn) ?? null;
		const others = typeof values.with === 'string' ? values.with.split(',').filter(Boolean) : [];
		for (const other of others) {
			try {
				const n = readVoevent(readLimited(other, maxBytes), { maxBytes, vocabulary, citedEvent }).notice;
				known.set(n.ivorn, n.sourceEventId);
			} catch (e) {
				throw new Error(`--with ${other}: ${(e as Error).message}`);
			}
		}
		const notice = readVoevent(whole, { maxBytes, vocabulary, citedEvent }).notice;
		return { json: notice, text: describeNotice(notice) };
	}
};

export default command;
