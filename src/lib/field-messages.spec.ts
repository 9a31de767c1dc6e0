import { describe, expect, it } from 'vitest';
import { z } from 'zod';
import { fieldLabel } from './field-messages.ts';
import { observationInput } from './server/coordination/observations';
import { readJson } from './server/platform/api';

const messages = (schema: z.ZodType, input: unknown) => {
	const r = schema.safeParse(input);
	return r.success ? [] : r.error.issues.map((i) => i.message);
};

describe('field messages in people’s words', () => {
	it('names a missing, mistyped or out-of-range field as the form labels it', () => {
		const s = z.object({ exposureS: z.number().gt(0), observedAt: z.iso.datetime(), filter: z.string().min(1).max(4), targetKind: z.enum(['galaxy', 'field']), epoch: z.number().int() });
		expect(messages(s, {})).toEqual(['Exposure (s) is missing.', 'Time (UTC) is missing.', 'Filter is missing.', 'Target kind is missing.', 'Epoch is missing.']);
		expect(messages(s, { exposureS: Number.NaN, observedAt: 'yesterday', filter: '', targetKind: 'star', epoch: 1.5 })).toEqual([
			'Exposure (s) must be a number.',
			'Time (UTC) must be an ISO 8601 time, e.g. 2026-12-02T03:04:05Z.',
			'Filter cannot be empty.',
			'Target kind must be one of “galaxy”, “field”.',
			'Epoch must be a whole number.'
		]);
		expect(messages(s, { exposureS: 0, observedAt: '2026-12-02T03:04:05Z', filter: 'abcdef', targetKind: 'field', epoch: 1 })).toEqual([
			'Exposure (s) must be greater than 0.',
			'Filter may be at most 4 characters.'
		]);
		expect(messages(s, 'text')).toEqual(['Send a JSON object.']);
	});

	it('spells out a field it has no label for, never zod’s wording', () => {
		expect(fieldLabel(['minAltitudeDeg'])).toBe('Min altitude deg');
		expect(fieldLabel(['citations', 0, 'cite'])).toBe('Cite');
		const all = messages(z.object({ minAltitudeDeg: z.number(), tags: z.array(z.string()).min(1) }), { tags: [] }).join(' ');
		expect(all).toBe('Min altitude deg is missing. Tags needs at least 1 item.');
		expect(all).not.toMatch(/Invalid input|expected|received/);
	});
});

describe('the API answers bad JSON bodies in people’s words', () => {
	const post = (body: unknown) => readJson(new Request('http://x.test/', { method: 'POST', body: JSON.stringify(body) }), observationInput);

	it('names each missing or non-numeric field by its form label, without internal names', async () => {
		expect.hasAssertions();
		const out = await post({ eventId: 'e1', raDeg: 10, decDeg: 10, filter: 'r', exposureS: 'sixty' });
		const body = (await out.response!.json()) as { error: { code: string; message: string; details: Record<string, string> } };
		expect(out.response!.status).toBe(422);
		expect(body.error.code).toBe('invalid');
		expect(body.error.details).toEqual({
			observedAt: 'Time (UTC) is missing.',
			exposureS: 'Exposure (s) must be a number.',
			limitingMag: 'Limiting magnitude (AB) is missing.'
		});
		expect(body.error.message).toBe('Time (UTC) is missing. Exposure (s) must be a number. Limiting magnitude (AB) is missing.');
		expect(body.error.message).not.toMatch(/observedAt|exposureS|limitingMag|Invalid input|NaN/);
	});

	it('refuses a body that is not JSON, or not an object, in a sentence', async () => {
		expect.hasAssertions();
		const notJson = await readJson(new Request('http://x.test/', { method: 'POST', body: '{' }), observationInput);
		expect((await notJson.response!.json()).error.message).toBe('The body is not valid JSON.');
		const notObject = await post([1, 2]);
		expect((await notObject.response!.json()).error.message).toBe('Send a JSON object.');
	});
});
