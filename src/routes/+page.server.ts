import { desc, eq } from 'drizzle-orm';
import type { PageServerLoad } from './$types';
import { db } from '$lib/server/db';
import * as table from '$lib/server/db/schema';
import { requirePermission } from '$lib/server/guard';

export const load: PageServerLoad = ({ locals }) => {
	if (!locals.user) return { board: null };
	requirePermission('board.view');
	const activity = db
		.select({ seq: table.eventLog.seq, action: table.eventLog.action, actor: table.eventLog.actorLabel, at: table.eventLog.createdAt })
		.from(table.eventLog)
		.where(eq(table.eventLog.room, 'board'))
		.orderBy(desc(table.eventLog.seq))
		.limit(15)
		.all()
		.map((r) => ({ ...r, at: r.at.toISOString() }));
	return { board: { activity } };
};
