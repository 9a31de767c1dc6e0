import { describe, expect, it } from 'vitest';
import { changeMoments, claimOpenAt, claimStateAt, mapAt, recordedBy, replayRange, thinMoments } from './replay.ts';
import { ACTION_KIND, parseTimelineKind, sinceMerger, timelineKindOf } from './timeline.ts';
import { ACTION_TOPIC } from '../live-messages.ts';

const MIN = 60_000;

describe('mapAt', () => {
	const maps = [
		{ id: 'initial', authoredAtMs: 1 * MIN, receivedAtMs: 2 * MIN },
		{ id: 'update', authoredAtMs: 60 * MIN, receivedAtMs: 61 * MIN },
		// An older notice that reached us late: it never replaces the newer one.
		{ id: 'late-preliminary', authoredAtMs: 0, receivedAtMs: 70 * MIN }
	];
	it('has no map before the first receipt, and switches to the update only once it was received', () => {
		expect.hasAssertions();
		expect(mapAt(maps, 1.9 * MIN)).toBeNull();
		expect(mapAt(maps, 2 * MIN)?.id).toBe('initial');
		expect(mapAt(maps, 60.9 * MIN)?.id).toBe('initial');
		expect(mapAt(maps, 61 * MIN)?.id).toBe('update');
		expect(mapAt(maps, 80 * MIN)?.id).toBe('update');
	});
});

describe('claimStateAt', () => {
	const released = { claimedAtMs: 10 * MIN, startedAtMs: null, doneAtMs: null, endedAtMs: 30 * MIN };
	const observed = { claimedAtMs: 10 * MIN, startedAtMs: 15 * MIN, doneAtMs: 40 * MIN, endedAtMs: null };
	it('follows a claim through its own times', () => {
		expect.hasAssertions();
		expect(claimStateAt(released, 9 * MIN)).toBeNull();
		expect(claimStateAt(released, 10 * MIN)).toBe('claimed');
		expect(claimStateAt(released, 30 * MIN)).toBeNull();
		expect(claimStateAt(observed, 20 * MIN)).toBe('observing');
		expect(claimStateAt(observed, 40 * MIN)).toBe('done');
		expect(claimOpenAt(observed, 20 * MIN)).toBe(true);
		expect(claimOpenAt(observed, 41 * MIN)).toBe(false);
	});
});

describe('range and moments', () => {
	it('runs from the first receipt to the close (or now), and lists changes inside it once each', () => {
		expect.hasAssertions();
		expect(replayRange([{ receivedAtMs: 5 }], 3, null, 100)).toEqual({ startMs: 3, endMs: 100 });
		expect(replayRange([{ receivedAtMs: 5 }], 3, 50, 100)).toEqual({ startMs: 3, endMs: 50 });
		expect(replayRange([], null, null, 100)).toBeNull();
		expect(changeMoments([7, null, 4, 7, 200, 1], { startMs: 3, endMs: 100 })).toEqual([4, 7]);
		expect(recordedBy([{ recordedAtMs: 1 }, { recordedAtMs: 5 }], 4)).toHaveLength(1);
	});
});

describe('timeline kinds', () => {
	it('places every live action (a kind or none) and reads kinds from a query string', () => {
		expect.hasAssertions();
		for (const action of Object.keys(ACTION_TOPIC)) expect(action in ACTION_KIND, action).toBe(true);
		expect(timelineKindOf('claim.lapsed')).toBe('claim');
		expect(timelineKindOf('person.invited')).toBeNull();
		expect(timelineKindOf('event.closed')).toBe('state');
		expect(timelineKindOf('no.such-action')).toBeNull();
		expect(parseTimelineKind('pointing')).toBe('pointing');
		expect(parseTimelineKind('Pointing')).toBeNull();
	});
	it('writes the time since the merger', () => {
		expect.hasAssertions();
		expect(sinceMerger(42_000, 0)).toBe('+42 s');
		expect(sinceMerger((2 * 60 + 7) * MIN, 0)).toBe('+2 h 07 min');
		expect(sinceMerger(0, 3 * MIN)).toBe('−3 min 00 s');
		expect(sinceMerger(0, null)).toBeNull();
	});
});

describe('thinMoments', () => {
	it('keeps the first change of each slice, only when there are more than max (or when told to)', () => {
		expect.hasAssertions();
		const range = { startMs: 0, endMs: 100 };
		expect(thinMoments([1, 2, 3], range, 4)).toEqual([1, 2, 3]);
		// Four slices of 25 ms: [0,25) [25,50) [50,75) [75,100]; the end falls in the last one.
		expect(thinMoments([1, 2, 26, 27, 60, 99, 100], range, 4)).toEqual([1, 26, 60, 99]);
		expect(thinMoments([1, 2], range, 4, { always: true })).toEqual([1]);
	});
});
