/**
 * The sky view as it stood at one moment of an event: which sky map was current, which claims
 * held their targets, which pointings had been reported. Pure: takes the event's history as plain
 * data with times in milliseconds.
 *
 * The times used, and why:
 * - a sky map counts from the moment its notice reached us (the inbox's receipt time): before
 *   that nobody could have seen it. Among the maps received by t, the current one is the one
 *   whose notice was authored last, the rule ingestion uses for the event's latest notice, so a
 *   late-arriving older notice does not take over.
 * - a pointing counts from the moment it was recorded (reported to us), not its exposure time: a
 *   pointing reported an hour after it was taken was not on anyone's map during that hour.
 * - a claim holds its target from `claimedAt`; it is being observed from `startedAt`, done from
 *   `doneAt`, and frees the target at `endedAt` (released or lapsed).
 */

export interface ReplayMap {
	id: string;
	receivedAtMs: number;
	authoredAtMs: number;
}

export interface ReplayClaim {
	claimedAtMs: number;
	startedAtMs: number | null;
	doneAtMs: number | null;
	/** Released or lapsed at. */
	endedAtMs: number | null;
}

export type ClaimStateAt = 'claimed' | 'observing' | 'done';

/** The map current at `atMs`: received by then, latest by authored time (ties: later receipt). Null before the first. */
export function mapAt<M extends ReplayMap>(maps: readonly M[], atMs: number): M | null {
	let best: M | null = null;
	for (const m of maps) {
		if (m.receivedAtMs > atMs) continue;
		if (!best || m.authoredAtMs > best.authoredAtMs || (m.authoredAtMs === best.authoredAtMs && m.receivedAtMs >= best.receivedAtMs)) best = m;
	}
	return best;
}

/** What a claim was at `atMs`; null before it was made and after it was released or lapsed. */
export function claimStateAt(c: ReplayClaim, atMs: number): ClaimStateAt | null {
	if (c.claimedAtMs > atMs) return null;
	if (c.doneAtMs !== null && c.doneAtMs <= atMs) return 'done';
	if (c.endedAtMs !== null && c.endedAtMs <= atMs) return null;
	if (c.startedAtMs !== null && c.startedAtMs <= atMs) return 'observing';
	return 'claimed';
}

/** Whether a claim held its target (claimed or being observed) at `atMs`. */
export function claimOpenAt(c: ReplayClaim, atMs: number): boolean {
	const s = claimStateAt(c, atMs);
	return s === 'claimed' || s === 'observing';
}

/** The items recorded by `atMs`, in their order. */
export function recordedBy<T extends { recordedAtMs: number }>(items: readonly T[], atMs: number): T[] {
	return items.filter((x) => x.recordedAtMs <= atMs);
}

/** The replay's range: from the first notice's receipt to the close (or `nowMs` while open); null without notices. */
export function replayRange(maps: readonly { receivedAtMs: number }[], firstNoticeMs: number | null, closedAtMs: number | null, nowMs: number): { startMs: number; endMs: number } | null {
	const starts = [firstNoticeMs, ...maps.map((m) => m.receivedAtMs)].filter((x): x is number => x !== null);
	if (!starts.length) return null;
	const startMs = Math.min(...starts);
	const endMs = Math.max(startMs, closedAtMs ?? nowMs);
	return { startMs, endMs };
}

/** Moments where the picture changes (map receipts, claims, pointings), sorted, unique, inside the range. */
export function changeMoments(times: readonly (number | null)[], range: { startMs: number; endMs: number }): number[] {
	const set = new Set<number>();
	for (const t of times) if (t !== null && t >= range.startMs && t <= range.endMs) set.add(t);
	return [...set].sort((a, b) => a - b);
}

/**
 * At most `max` of the sorted `moments`: the first change in each of `max` equal slices of the
 * range. The slider cannot show two changes closer than a slice apart, and "next change" then
 * steps slice by slice through a busy stretch instead of one pointing at a time. `always` thins
 * a list that was already cut to one moment per slice for some of its sources.
 */
export function thinMoments(moments: readonly number[], range: { startMs: number; endMs: number }, max: number, o: { always?: boolean } = {}): number[] {
	if (moments.length <= max && !o.always) return [...moments];
	const sliceMs = Math.max(1, (range.endMs - range.startMs) / max);
	const out: number[] = [];
	let lastSlice = -1;
	for (const m of moments) {
		const slice = Math.min(max - 1, Math.floor((m - range.startMs) / sliceMs));
		if (slice !== lastSlice) out.push(m);
		lastSlice = slice;
	}
	return out;
}
