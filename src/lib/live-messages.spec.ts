import { describe, expect, it } from 'vitest';
import { ACTION_TOPIC, eventIdOf, inTopic, isAction, type LiveAction, type LiveMessage } from './live-messages.ts';
import { describeAction } from './activity.ts';

const message = <A extends LiveAction>(type: A, payload: LiveMessage<A>['payload'], room: LiveMessage['room'] = 'board') =>
	({ seq: 1, room, type, actor: 'system', payload, at: '2026-12-02T00:00:00.000Z' }) as LiveMessage;

describe('live messages', () => {
	const ranked = message('targets.ranked', { eventId: 'E1', skymapId: 'm1', galaxies: 3, fields: 0, catalogId: null });
	const settings = message('claim.settings', { scope: 'global', lapseMinutes: 30 });
	const shift = message('shift.removed', { shiftId: 's1', userId: 'u1' });

	it('groups actions by topic without matching names', () => {
		expect(inTopic(ranked, 'targets')).toBe(true);
		expect(inTopic(ranked, 'claims', 'observations')).toBe(false);
		expect(inTopic(settings, 'claims')).toBe(true);
		expect(inTopic(shift, 'alerts', 'duty', 'roster')).toBe(true);
		// A newer server's action this page does not know is nobody's.
		expect(inTopic({ type: 'comet.sighted' }, 'alerts', 'duty', 'roster', 'targets', 'catalogs', 'claims', 'observations', 'candidates', 'people')).toBe(false);
	});

	it('narrows by action and finds the event a message is about', () => {
		expect(isAction(ranked, 'targets.ranked', 'claim.claimed')).toBe(true);
		expect(isAction(shift, 'targets.ranked')).toBe(false);
		if (isAction(ranked, 'targets.ranked')) expect(ranked.payload.skymapId).toBe('m1');
		expect(eventIdOf(ranked)).toBe('E1');
		expect(eventIdOf(settings)).toBeNull();
	});

	it('has a topic and a phrase of its own for every action', () => {
		const actions = Object.keys(ACTION_TOPIC);
		expect(actions.length).toBeGreaterThan(40);
		for (const a of actions) expect(describeAction(a), a).not.toBe(a);
		expect(describeAction('comet.sighted')).toBe('comet.sighted');
	});
});
