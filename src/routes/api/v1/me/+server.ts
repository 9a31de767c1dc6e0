import { json } from '@sveltejs/kit';
import { eq } from 'drizzle-orm';
import { apiRoute } from '$lib/server/platform/api';
import { db } from '$lib/server/platform/db';
import * as table from '$lib/server/platform/db/schema';
import { error } from '@sveltejs/kit';

/** Who the request is: a person (cookie or token) or a telescope (its token). */
export const GET = apiRoute(({ locals }) => {
	if (!locals.user && !locals.telescopeId) error(401, 'Sign in or present a valid token.');
	const telescope = locals.telescopeId
		? db
				.select({ id: table.telescope.id, name: table.telescope.name, teamId: table.telescope.teamId })
				.from(table.telescope)
				.where(eq(table.telescope.id, locals.telescopeId))
				.get()
		: null;
	const user = locals.user ? { id: locals.user.id, name: locals.user.name, email: locals.user.email, roles: locals.user.roles, teamIds: locals.user.teamIds } : null;
	return json({ user, telescope: telescope ?? null });
});
