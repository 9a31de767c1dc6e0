import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from './testing/database';
import { db } from './db';
import * as table from './db/schema';
import { onRecorded, record, SYSTEM, type LiveMessage, type LivePayloads } from './realtime';

const claim: LivePayloads['claim.claimed'] = {
	claimId: 'c1',
	eventId: 'E1',
	targetKind: 'galaxy',
	targetId: '17',
	filter: '',
	epoch: 1,
	telescopeId: 't1',
	teamId: 'team-1',
	userId: null,
	state: 'claimed'
};

let offs: (() => void)[] = [];
beforeEach(() => {
	createTestDatabase();
});
afterEach(() => {
	for (const off of offs) off();
	offs = [];
});

describe('record and onRecorded, typed by the action map', () => {
	it('hands a reaction the payload of its own action only; a catch-all listener hears every action in order', () => {
		const heard: string[] = [];
		const all: LiveMessage[] = [];
		offs.push(
			onRecorded('claim.claimed', (p, m) => heard.push(`${m.type} ${m.room} ${p.claimId} ${p.targetKind}`)),
			onRecorded('shift.removed', (p) => heard.push(`shift ${p.shiftId}`)),
			onRecorded((m) => all.push(m))
		);
		const sent = record(SYSTEM, 'claim.claimed', 'event:E1', claim);
		record(SYSTEM, 'team.created', 'board', { teamId: 'team-1', name: 'North' });
		expect(heard).toEqual(['claim.claimed event:E1 c1 galaxy']);
		expect(all.map((m) => m.type)).toEqual(['claim.claimed', 'team.created']);
		expect(sent.payload).toEqual(claim);
		// The wire format is the event-log row: action, room and payload as given.
		const row = db.select().from(table.eventLog).where(eq(table.eventLog.seq, sent.seq)).get()!;
		expect([row.action, row.room, row.payload]).toEqual(['claim.claimed', 'event:E1', claim]);
	});

	it('stops a reaction that was removed, and one failing reaction does not stop the next', () => {
		const heard: string[] = [];
		const off = onRecorded('team.updated', () => heard.push('removed'));
		offs.push(
			onRecorded('team.updated', () => {
				throw new Error('boom');
			}),
			onRecorded('team.updated', (p) => heard.push(p.name))
		);
		off();
		record(SYSTEM, 'team.updated', 'board', { teamId: 'team-1', name: 'South' });
		expect(heard).toEqual(['South']);
	});

	it('does not compile a payload that does not fit its action (the lines below are checked by svelte-check)', () => {
		const wrongCalls = [
			// @ts-expect-error claimId is a string
			() => record(SYSTEM, 'claim.claimed', 'event:E1', { ...claim, claimId: 42 }),
			// @ts-expect-error a claim's payload is not a sky map's
			() => record(SYSTEM, 'skymap.analysed', 'board', claim),
			// @ts-expect-error no such action
			() => record(SYSTEM, 'claim.clamed', 'event:E1', claim),
			// @ts-expect-error a room is 'board' or 'event:<id>'
			() => record(SYSTEM, 'claim.claimed', 'lobby', claim),
			() =>
				onRecorded('skymap.analysed', (p) => {
					// @ts-expect-error the sky-map id is a string
					const id: number = p.skymapId;
					return id;
				})
		];
		// Not run: only their types matter. Nothing was logged.
		expect(wrongCalls).toHaveLength(5);
		expect(db.select().from(table.eventLog).all()).toEqual([]);
	});
});
