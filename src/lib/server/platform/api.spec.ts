import { error, json, type RequestEvent } from '@sveltejs/kit';
import { describe, expect, it } from 'vitest';
import { apiErrorFrom, apiRoute, jsonListResponse } from './api';
import { DomainError, InputError, RateLimitError } from './errors';

describe('the API answer to a refusal', () => {
	it('gives status, code and message, and the per-field messages as details', async () => {
		const r = apiErrorFrom(new DomainError(422, 'invalid', 'filter: not one of the telescope’s', { filter: 'not one of the telescope’s' }));
		expect(r.status).toBe(422);
		expect(await r.json()).toEqual({ error: { code: 'invalid', message: 'filter: not one of the telescope’s', details: { filter: 'not one of the telescope’s' } } });
	});
	it('leaves details out when no field is named', async () => {
		const r = apiErrorFrom(new DomainError(409, 'taken', 'Already taken by North Ridge.'));
		expect(r.status).toBe(409);
		expect(await r.json()).toEqual({ error: { code: 'taken', message: 'Already taken by North Ridge.' } });
	});
	it('answers a refusal of one field with that field', async () => {
		const r = apiErrorFrom(new InputError('Give the catalogue a name.', 'name'));
		expect(r.status).toBe(400);
		expect(await r.json()).toEqual({ error: { code: 'invalid', message: 'Give the catalogue a name.', details: { name: 'Give the catalogue a name.' } } });
	});
	it('tells a client that asked too often when to ask again (Retry-After); other refusals carry no such header', async () => {
		const r = apiErrorFrom(new RateLimitError('Too many text replies from +12025550143: at most 10 a minute.', 42));
		expect(r.status).toBe(429);
		expect(r.headers.get('retry-after')).toBe('42');
		expect(await r.json()).toEqual({ error: { code: 'too_many_requests', message: 'Too many text replies from +12025550143: at most 10 a minute.' } });
		expect(apiErrorFrom(new DomainError(409, 'taken', 'Already taken.')).headers.get('retry-after')).toBeNull();
	});
	it('rethrows anything that is not a refusal', () => {
		const bug = new TypeError('x is undefined');
		expect(() => apiErrorFrom(bug)).toThrow(bug);
	});
	it('is what apiRoute answers with, beside error(...)', async () => {
		const event = {} as RequestEvent;
		const refused = await apiRoute(() => {
			throw new DomainError(403, 'forbidden', 'Not your team’s telescope.');
		})(event);
		expect(refused.status).toBe(403);
		expect(await refused.json()).toEqual({ error: { code: 'forbidden', message: 'Not your team’s telescope.' } });
		const missing = await apiRoute(() => error(404, 'No event X.'))(event);
		expect(missing.status).toBe(404);
		expect(await missing.json()).toEqual({ error: { code: 'not_found', message: 'No event X.' } });
		await expect(
			apiRoute(() => {
				throw new RangeError('bug');
			})(event)
		).rejects.toThrow('bug');
	});
});

describe('a long list answered in pieces', () => {
	it('sends the same JSON as one json() answer, for empty, short and long lists', async () => {
		expect.hasAssertions();
		for (const n of [0, 1, 499, 500, 501, 1234]) {
			const items = Array.from({ length: n }, (_, i) => ({ id: `o${i}`, at: new Date(Date.UTC(2026, 11, 3, 0, 0, i)), tags: i % 3 ? [] : ['a"b'] }));
			const streamed = jsonListResponse('results', items, 201);
			expect(streamed.status).toBe(201);
			expect(streamed.headers.get('content-type')).toBe('application/json');
			expect(await streamed.text(), `${n} items`).toBe(await json({ results: items }).text());
		}
	});
});

