/**
 * The collaboration's mailing list: where an event's report goes when the event is closed. One
 * setting row (id = 1); an empty address means reports are not sent.
 */
import { eq } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import type { SessionUser } from '../people/auth';

export interface MailingListSetting {
	address: string;
	updatedBy: string | null;
	updatedAt: string | null;
}

export function mailingList(): MailingListSetting {
	const row = db
		.select({ address: table.collaborationSetting.mailingListAddress, updatedAt: table.collaborationSetting.updatedAt, by: table.user.name })
		.from(table.collaborationSetting)
		.leftJoin(table.user, eq(table.user.id, table.collaborationSetting.updatedBy))
		.where(eq(table.collaborationSetting.id, 1))
		.get();
	return { address: row?.address ?? '', updatedBy: row?.by ?? null, updatedAt: row?.updatedAt?.toISOString() ?? null };
}

/** Set the address ('' stops sending). The address is checked by the caller's schema. */
export function setMailingList(user: Pick<SessionUser, 'id'>, address: string, now = new Date()): MailingListSetting {
	db.insert(table.collaborationSetting)
		.values({ id: 1, mailingListAddress: address, updatedBy: user.id, updatedAt: now })
		.onConflictDoUpdate({ target: table.collaborationSetting.id, set: { mailingListAddress: address, updatedBy: user.id, updatedAt: now } })
		.run();
	return mailingList();
}
