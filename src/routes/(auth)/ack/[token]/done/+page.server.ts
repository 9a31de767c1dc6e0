import { error, redirect } from '@sveltejs/kit';
import type { PageServerLoad } from './$types';
import { DomainError } from '$lib/server/platform/errors';
import * as ackLinks from '$lib/server/duty/ack-links';

/** What a confirmed link did. Public like the link itself; shows nothing a link that was not used would not. */
export const load: PageServerLoad = ({ params, setHeaders }) => {
	setHeaders({ 'cache-control': 'no-store' });
	let outcome: ReturnType<typeof ackLinks.ackLinkOutcome>;
	try {
		outcome = ackLinks.ackLinkOutcome(params.token);
	} catch (e) {
		if (!(e instanceof DomainError)) throw e;
		error(e.status, e.message);
	}
	if (!outcome) redirect(303, `/ack/${params.token}`);
	return { outcome: { ...outcome, usedAt: outcome.usedAt.toISOString() } };
};
