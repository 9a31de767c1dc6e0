import type { PageServerLoad } from './$types';
import { requirePermission } from '$lib/server/people/guard';
import { archive, readArchiveFilters } from '$lib/server/closeout/archive';

export const load: PageServerLoad = ({ url, depends }) => {
	requirePermission('events.view');
	depends('app:archive');
	const { filters, errors } = readArchiveFilters(url.searchParams);
	return { ...archive(filters), errors, query: Object.fromEntries(url.searchParams) as Record<string, string> };
};
