import { error } from '@sveltejs/kit';
import type { RequestHandler } from './$types';
import { feedFor } from '$lib/server/duty/calendar';

/**
 * A calendar feed: public by design, the secret in the address is the permission (calendar
 * programs fetch it without signing in). Unknown, revoked or no longer permitted: 404.
 */
export const GET: RequestHandler = ({ params }) => {
	const secret = params.file.endsWith('.ics') ? params.file.slice(0, -4) : params.file;
	const feed = feedFor(secret);
	if (!feed) error(404, 'There is no calendar at this address: it may have been revoked or replaced by a new one.');
	return new Response(feed.text, {
		headers: {
			'content-type': 'text/calendar; charset=utf-8',
			'content-disposition': `inline; filename="${feed.scope === 'roster' ? 'strainline-roster' : 'strainline-my-shifts'}.ics"`,
			'cache-control': 'private, no-cache'
		}
	});
};
