import { isHttpError, json, type RequestEvent, type RequestHandler } from '@sveltejs/kit';
import type { z } from 'zod';
import { DomainError, RateLimitError } from './errors';
import { API_JSON_MAX_BYTES } from '../../limits.ts';
import '../../field-messages';

/** The API's error body: `{ error: { code, message } }`. */
export function apiError(status: number, code: string, message: string, details?: unknown) {
	return json({ error: { code, message, ...(details ? { details } : {}) } }, { status });
}

const CODES: Record<number, string> = {
	400: 'bad_request',
	401: 'unauthenticated',
	403: 'forbidden',
	404: 'not_found',
	409: 'conflict',
	413: 'too_large',
	415: 'unsupported_media_type',
	422: 'invalid'
};

/**
 * The API's answer to a refusal from a domain module: `{ error: { code, message, details? } }` with
 * its status, `details` being the message per field when there are any. Anything that is not a
 * DomainError is rethrown, so an unexpected failure still reaches `handleError`.
 */
export function apiErrorFrom(e: unknown): Response {
	if (!(e instanceof DomainError)) throw e;
	// An error may carry richer details than its field messages (numbered CSV lines, say).
	const own = (e as { details?: unknown }).details;
	const response = apiError(e.status, e.code, e.message, own !== undefined ? own : Object.keys(e.fields).length ? e.fields : undefined);
	if (e instanceof RateLimitError) response.headers.set('retry-after', String(e.retryAfterS));
	return response;
}

/** Items of a long list serialised per piece of a streamed answer (≈ 3 ms of the server's thread each). */
const LIST_ITEMS_PER_PIECE = 250;
/** Rest between two pieces (ms): a stream's pulls otherwise follow each other without letting other work in. */
const LIST_PIECE_REST_MS = 3;

/**
 * A JSON answer `{ [key]: items }` written a few hundred items at a time with a rest between,
 * rather than one `JSON.stringify` of the whole list: the 9,000 results of a CSV upload took
 * ≈ 0.1 s of the server's thread in one piece (the live bench), and live messages waited behind it.
 * Same bytes as `json({ [key]: items }, { status })`.
 */
export function jsonListResponse(key: string, items: readonly unknown[], status = 200): Response {
	const encoder = new TextEncoder();
	let next = -1;
	const body = new ReadableStream<Uint8Array>({
		async pull(controller) {
			if (next > 0) await new Promise((resolve) => setTimeout(resolve, LIST_PIECE_REST_MS));
			if (next < 0) {
				controller.enqueue(encoder.encode(`{${JSON.stringify(key)}:[`));
				next = 0;
				return;
			}
			if (next >= items.length) {
				controller.enqueue(encoder.encode(']}'));
				controller.close();
				return;
			}
			const end = Math.min(items.length, next + LIST_ITEMS_PER_PIECE);
			const piece = items.slice(next, end).map((item) => JSON.stringify(item)).join(',');
			controller.enqueue(encoder.encode(next > 0 ? `,${piece}` : piece));
			next = end;
		}
	});
	return new Response(body, { status, headers: { 'content-type': 'application/json' } });
}

/** Wrap a `+server.ts` handler so expected failures (`error(...)`, a DomainError) come out in the API's error shape. */
export function apiRoute(handler: (event: RequestEvent) => Promise<Response> | Response): RequestHandler {
	return async (event) => {
		try {
			return await handler(event);
		} catch (e) {
			if (isHttpError(e)) return apiError(e.status, CODES[e.status] ?? 'error', e.body.message);
			return apiErrorFrom(e);
		}
	};
}

/** Parse a JSON body against a schema, or answer 400/422 with the field problems: one sentence per field (naming it as the forms do), and `details` `{ field: message }`. */
export async function readJson<S extends z.ZodType>(request: Request, schema: S, maxBytes = API_JSON_MAX_BYTES) {
	const text = await request.text();
	if (text.length > maxBytes) return { response: apiError(413, 'too_large', `Body over ${maxBytes} bytes.`) };
	let body: unknown;
	try {
		body = JSON.parse(text);
	} catch {
		return { response: apiError(400, 'bad_json', 'The body is not valid JSON.') };
	}
	const parsed = schema.safeParse(body);
	if (!parsed.success) {
		const details: Record<string, string> = {};
		for (const i of parsed.error.issues) details[i.path.join('.') || 'body'] ??= i.message;
		return { response: apiError(422, 'invalid', Object.values(details).join(' '), details) };
	}
	return { data: parsed.data as z.infer<S> };
}
