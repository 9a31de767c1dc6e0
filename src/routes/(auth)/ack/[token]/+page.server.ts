import { error, fail, redirect } from '@sveltejs/kit';
import type { Actions, PageServerLoad } from './$types';
import { DomainError } from '$lib/server/platform/errors';
import * as ackLinks from '$lib/server/duty/ack-links';

/**
 * Public by design: the signed, single-use token in the path is the permission (one page, its
 * person, until it expires). Opening the link only shows what confirming does, so a link scanner
 * acknowledges nothing; the POST from this page acknowledges.
 */
export const load: PageServerLoad = ({ params, setHeaders }) => {
	setHeaders({ 'cache-control': 'no-store' });
	try {
		const offer = ackLinks.ackLinkPreview(params.token);
		return { offer: { ...offer, expiresAt: offer.expiresAt.toISOString() } };
	} catch (e) {
		if (!(e instanceof DomainError)) throw e;
		// A forged (400), used (409) or expired (410) link: the error page says which, with its status.
		error(e.status, e.message);
	}
};

export const actions: Actions = {
	default: ({ params }) => {
		try {
			ackLinks.acknowledgeByLink(params.token);
		} catch (e) {
			if (!(e instanceof DomainError)) throw e;
			return fail(e.status, { message: e.message });
		}
		// The link is spent now: its own page would refuse it, so the outcome has a page of its own.
		redirect(303, `/ack/${params.token}/done`);
	}
};
