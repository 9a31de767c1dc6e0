import { error, json, redirect } from '@sveltejs/kit';
import type { RequestHandler } from './$types';
import { requireUser } from '$lib/server/people/guard';
import { actorOf } from '$lib/server/platform/realtime';
import { importCatalog } from '$lib/server/targeting/catalogs';
import { apiErrorFrom } from '$lib/server/platform/api';
import { CATALOG_FIELDS, type CatalogField } from '$lib/targeting/catalog-csv';

const CSV_TYPES = ['text/csv', 'application/csv', 'text/plain', 'application/octet-stream'];

/**
 * POST the catalogue file itself as the body (streamed; never read whole), with the rest in the
 * query: `name`, `note`, `synthetic=1`, `skipInvalid=1`, `columns` (JSON: field → header).
 * 201 with the report when stored, 422 with the report when refused, 400 for a bad request.
 */
export const POST: RequestHandler = async ({ request, url, locals }) => {
	if (!locals.user && !locals.telescopeId) redirect(303, `/sign-in?next=${encodeURIComponent('/catalogs/import')}`);
	const user = requireUser('catalogs.manage');
	const type = (request.headers.get('content-type') ?? '').split(';')[0].trim().toLowerCase();
	if (!CSV_TYPES.includes(type)) error(400, 'Send the catalogue file as the request body with Content-Type text/csv.');
	if (!request.body) error(400, 'The body is empty: send the catalogue file.');
	let columns: Partial<Record<CatalogField, string>> | undefined;
	const rawColumns = url.searchParams.get('columns');
	if (rawColumns) {
		let parsed: unknown;
		try {
			parsed = JSON.parse(rawColumns);
		} catch {
			error(400, 'columns must be a JSON object of field → column.');
		}
		if (!parsed || typeof parsed !== 'object' || Array.isArray(parsed)) error(400, 'columns must be a JSON object of field → column.');
		columns = {};
		for (const [k, v] of Object.entries(parsed as Record<string, unknown>)) {
			if (!(CATALOG_FIELDS as readonly string[]).includes(k) || typeof v !== 'string') error(400, `Unknown field or column in the mapping: ${k}.`);
			if (v.trim()) columns[k as CatalogField] = v;
		}
	}
	try {
		const out = await importCatalog(
			actorOf(user),
			{
				name: url.searchParams.get('name') ?? '',
				sourceNote: url.searchParams.get('note') ?? '',
				synthetic: url.searchParams.get('synthetic') === '1',
				skipInvalid: url.searchParams.get('skipInvalid') === '1',
				columns
			},
			request.body
		);
		return json(out, { status: out.state === 'ready' ? 201 : 422 });
	} catch (e) {
		return apiErrorFrom(e);
	}
};
