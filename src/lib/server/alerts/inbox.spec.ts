import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { eq } from 'drizzle-orm';
import { beforeEach, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../platform/testing/database';
import * as table from '../platform/db/schema';
import type { DB } from '../platform/db';
import { commitNotice, MAX_ATTEMPTS, processInbox, reprocessNotice } from './ingest';
import { listInboxProblems } from './inbox';

const dir = fileURLToPath(new URL('../../../../tests/fixtures/notices/', import.meta.url));
const raw = (name: string) => readFileSync(dir + name, 'utf8');
// No host is allowed: a notice's sky map is refused at once, so nothing here waits on the network.
const fetch = { allowedHosts: [] as string[], timeoutMs: 500 };

let database: DB;
beforeEach(() => {
	database = createTestDatabase();
});

describe('notice inbox: refused and failed notices', () => {
	it('lists a refused notice with its reason and raw text, and not the notices that were stored', async () => {
		const bad = raw('malformed/unclosed-tag.xml');
		const refused = await processInbox(commitNotice(bad, 'api').inboxId, { fetch });
		expect(refused.outcome).toBe('rejected');
		await processInbox(commitNotice(raw('bns-initial.xml'), 'vtp').inboxId, { fetch });
		const problems = listInboxProblems();
		expect(problems).toHaveLength(1);
		expect(problems[0]).toMatchObject({ inboxId: refused.inboxId, state: 'refused', via: 'api', reason: refused.error, raw: bad, rawChars: bad.length });
	});

	it('lists a row whose processing keeps failing, and one it gave up on, but not a row not yet tried', () => {
		const tried = commitNotice(raw('bns-initial.xml'), 'vtp').inboxId;
		const givenUp = commitNotice(raw('bbh-initial.xml'), 'vtp').inboxId;
		commitNotice(raw('bns-update.xml'), 'vtp');
		database.update(table.noticeInbox).set({ attempts: 2 }).where(eq(table.noticeInbox.id, tried)).run();
		database.update(table.noticeInbox).set({ attempts: MAX_ATTEMPTS }).where(eq(table.noticeInbox.id, givenUp)).run();
		const byId = new Map(listInboxProblems().map((p) => [p.inboxId, p]));
		expect([...byId.keys()].sort()).toEqual([tried, givenUp].sort());
		expect(byId.get(tried)!.state).toBe('retrying');
		expect(byId.get(givenUp)!.state).toBe('gave-up');
		expect(byId.get(givenUp)!.reason).toMatch(/no longer retried/);
	});

	it('processes a row again on request: a notice it gave up on becomes an event; a malformed one is refused again', async () => {
		const givenUp = commitNotice(raw('bns-initial.xml'), 'vtp').inboxId;
		database.update(table.noticeInbox).set({ attempts: MAX_ATTEMPTS }).where(eq(table.noticeInbox.id, givenUp)).run();
		const done = await reprocessNotice(givenUp, { fetch });
		expect(done).toMatchObject({ outcome: 'event-created', eventId: 'sx30041207' });
		expect(database.select().from(table.gwEvent).all()).toHaveLength(1);
		expect(listInboxProblems()).toEqual([]);
		// Again: the stored notice is not stored twice.
		expect(await reprocessNotice(givenUp, { fetch })).toMatchObject({ outcome: 'already-processed', eventId: 'sx30041207' });
		expect(database.select().from(table.notice).all()).toHaveLength(1);

		const bad = await processInbox(commitNotice(raw('malformed/wrong-root.xml'), 'vtp').inboxId, { fetch });
		const again = await reprocessNotice(bad.inboxId, { fetch });
		expect(again).toMatchObject({ outcome: 'rejected', error: bad.error });
		expect(database.select().from(table.noticeInbox).where(eq(table.noticeInbox.id, bad.inboxId)).get()).toMatchObject({ attempts: 1, error: bad.error });
		expect(listInboxProblems().map((p) => p.inboxId)).toEqual([bad.inboxId]);

		expect(await reprocessNotice(9999, { fetch })).toBeUndefined();
	});
});
