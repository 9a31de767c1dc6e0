import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { beforeEach, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../platform/testing/database';
import * as table from '../platform/db/schema';
import type { DB } from '../platform/db';
import { InputError } from '../platform/errors';
import { commitNotice } from './ingest';
import { listStreams, previewNotice, resetVocabulary, saveVocabulary, vocabularyFor, vocabularyFromForm, vocabularyToForm } from './streams';
import { DEFAULT_VOCABULARY } from '../../alerts/voevent.ts';

const dir = fileURLToPath(new URL('../../../../tests/fixtures/notices/standard/', import.meta.url));
const raw = (name: string) => readFileSync(dir + name, 'utf8');
const ALT = 'ivo://strainline.example/alt-pipeline';

let database: DB;
beforeEach(() => {
	database = createTestDatabase();
});

describe('stream vocabularies', () => {
	it('turns the form text into a vocabulary and back, and names the field at fault', () => {
		const form = vocabularyToForm(ALT, DEFAULT_VOCABULARY);
		expect(form.far).toBe('FalseAlarmRate, FAR, FalseAlarmRateHz');
		expect(vocabularyFromForm(form)).toEqual(DEFAULT_VOCABULARY);
		const renamed = vocabularyFromForm({ ...form, sourceEventId: ' Candidate_Label ,\n Label ', farUnit: 'per-year', eventIdFromIvorn: '^([A-Z]\\d{8})-' });
		expect(renamed.names.sourceEventId).toEqual(['Candidate_Label', 'Label']);
		expect(renamed).toMatchObject({ farUnit: 'per-year', eventIdFromIvorn: '^([A-Z]\\d{8})-' });
		let error: unknown;
		try {
			vocabularyFromForm({ ...form, far: ' , ' });
		} catch (e) {
			error = e;
		}
		expect(error).toBeInstanceOf(InputError);
		expect((error as InputError).fields).toEqual({ far: 'Give at least one name.' });
		expect(() => vocabularyFromForm({ ...form, eventIdFromIvorn: '^A' })).toThrow('The rule needs exactly one capture group ( … ); it has 0.');
	});

	it('previews a pasted notice with an edited vocabulary and stores nothing', () => {
		const vocabulary = vocabularyFromForm({
			...vocabularyToForm(ALT, DEFAULT_VOCABULARY),
			...Object.fromEntries(Object.entries(JSON.parse(raw('renamed-params.vocabulary.json')).names as Record<string, string[]>).map(([k, v]) => [k, v.join(', ')])),
			farUnit: 'per-year'
		});
		const before = previewNotice(raw('renamed-params.xml'), DEFAULT_VOCABULARY, ALT);
		expect(before).toMatchObject({ ok: false, waiting: false });
		expect(before.ok ? '' : before.reason).toMatch(/^missing required Param SourceEventId/);
		const after = previewNotice(raw('renamed-params.xml'), vocabulary, ALT);
		expect(after).toMatchObject({ ok: true, eventIdFrom: 'param', otherStream: false, notice: { sourceEventId: 'A30050505', kind: 'initial' } });
		const waiting = previewNotice(raw('retraction-empty-what.xml'), DEFAULT_VOCABULARY, ALT);
		expect(waiting).toMatchObject({ ok: false, waiting: true });
		for (const t of [table.noticeInbox, table.notice, table.gwEvent, table.noticeStream]) expect(database.select().from(t).all()).toHaveLength(0);
	});

	it('saves, lists and resets a stream’s vocabulary; streams seen in the inbox are listed with the defaults', () => {
		commitNotice(raw('namespaced.xml'), 'api');
		commitNotice(raw('supersedes-only.xml'), 'api');
		expect(listStreams()).toEqual([expect.objectContaining({ stream: 'ivo://strainline.example/fake-broker', configured: false, received: 2 })]);
		saveVocabulary(ALT, { ...DEFAULT_VOCABULARY, farUnit: 'per-year' }, null);
		expect(listStreams().map((s) => [s.stream, s.configured])).toEqual([
			[ALT, true],
			['ivo://strainline.example/fake-broker', false]
		]);
		expect(vocabularyFor(ALT).farUnit).toBe('per-year');
		resetVocabulary(ALT);
		expect(vocabularyFor(ALT)).toEqual(DEFAULT_VOCABULARY);
		expect(() => saveVocabulary('ivo://x#y', DEFAULT_VOCABULARY, null)).toThrow(/without the "#…" part/);
	});
});
