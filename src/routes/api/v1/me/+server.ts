import { json } from '@sveltejs/kit';
import { apiRoute } from '$lib/server/platform/api';
import { getTelescope } from '$lib/server/people/telescopes';
import { error } from '@sveltejs/kit';

/** Who the request is: a person (cookie or token) or a telescope (its token). */
export const GET = apiRoute(({ locals }) => {
	if (!locals.user && !locals.telescopeId) error(401, 'Sign in or present a valid token.');
	const row = locals.telescopeId ? getTelescope(locals.telescopeId) : null;
	const telescope = row ? { id: row.id, name: row.name, teamId: row.teamId } : null;
	const user = locals.user ? { id: locals.user.id, name: locals.user.name, email: locals.user.email, roles: locals.user.roles, teamIds: locals.user.teamIds } : null;
	return json({ user, telescope: telescope ?? null });
});
