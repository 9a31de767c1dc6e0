/**
 * The notice inbox as people see it: notices that were refused (malformed: nothing was stored
 * but their raw text) and notices whose processing failed, newest first, with the reason.
 */
import { and, desc, gt, isNotNull, isNull, or, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { MAX_ATTEMPTS } from './ingest';

/** Raw text beyond this many characters is cut in the listing (the whole text stays in the database). */
export const RAW_PREVIEW_CHARS = 20_000;

/** `waiting`: kept unprocessed until a packet it cites is stored (the reason names them). */
export type InboxProblemState = 'refused' | 'retrying' | 'gave-up' | 'waiting';

export interface InboxProblem {
	inboxId: number;
	key: string;
	via: table.NoticeInboxRow['via'];
	format: table.NoticeInboxRow['format'];
	receivedAt: string;
	processedAt: string | null;
	attempts: number;
	state: InboxProblemState;
	reason: string;
	raw: string;
	rawChars: number;
}

/**
 * Refused rows (processed with a reason, no notice stored) and rows whose processing has not
 * finished after at least one attempt. Rows still waiting for their first attempt are not problems.
 */
export function listInboxProblems(limit = 50): InboxProblem[] {
	const storedNotice = sql`exists (select 1 from ${table.notice} where ${table.notice.inboxId} = ${table.noticeInbox.id})`;
	const rows = db
		.select()
		.from(table.noticeInbox)
		.where(
			or(
				and(isNotNull(table.noticeInbox.processedAt), isNotNull(table.noticeInbox.error), sql`not ${storedNotice}`),
				and(isNull(table.noticeInbox.processedAt), gt(table.noticeInbox.attempts, 0))
			)
		)
		.orderBy(desc(table.noticeInbox.receivedAt), desc(table.noticeInbox.id))
		.limit(limit)
		.all();
	return rows.map((r) => ({
		inboxId: r.id,
		key: r.ivorn.startsWith('invalid:') ? 'no readable IVORN' : r.ivorn,
		via: r.via,
		format: r.format,
		receivedAt: r.receivedAt.toISOString(),
		processedAt: r.processedAt?.toISOString() ?? null,
		attempts: r.attempts,
		state: r.processedAt ? 'refused' : r.error ? 'waiting' : r.attempts >= MAX_ATTEMPTS ? 'gave-up' : 'retrying',
		reason: r.error ?? (r.attempts >= MAX_ATTEMPTS ? `Processing failed ${r.attempts} times; it is no longer retried by itself.` : 'Processing did not finish; it is tried again every few minutes.'),
		raw: r.rawXml.slice(0, RAW_PREVIEW_CHARS),
		rawChars: r.rawXml.length
	}));
}
