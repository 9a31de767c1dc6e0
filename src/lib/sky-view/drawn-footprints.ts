/**
 * Which observed footprints the sky view draws when an event has thousands of pointings: repeats
 * of one pointing (the same field of view at the same place, other epochs or filters) are drawn
 * once with their count, and beyond `max` places the latest are drawn. The coverage figures are
 * computed on every pointing elsewhere; this only decides what the picture carries.
 */
import type { FootprintShape } from '../targeting/sky-geometry.ts';

export interface TimedFootprint {
	raDeg: number;
	decDeg: number;
	/** When the pointing counts (taken, or reported for the replay), ms. */
	timeMs: number;
}

export interface DrawnFootprint<T> {
	/** The latest pointing at this place: its position, shape and words stand for the rest. */
	latest: T;
	/** Pointings at this place (1 or more). */
	count: number;
}

/** Positions closer than this (degrees, on both axes) count as one place: 0.36″, far below any field of view. */
const SAME_PLACE_DEG = 1e-4;

const shapeKey = (s: FootprintShape) => (s.shape === 'circle' ? `c${s.diameterDeg}` : `r${s.widthDeg}x${s.heightDeg}`);

/**
 * Group `items` by place and shape and keep the `max` places pointed at most recently, in time
 * order. `places` is how many distinct places there were before the cut.
 */
export function drawnFootprints<T extends TimedFootprint>(items: readonly T[], shapeOf: (item: T) => FootprintShape, max: number): { drawn: DrawnFootprint<T>[]; places: number } {
	const byPlace = new Map<string, DrawnFootprint<T>>();
	for (const item of items) {
		const key = `${shapeKey(shapeOf(item))}|${Math.round(item.raDeg / SAME_PLACE_DEG)}|${Math.round(item.decDeg / SAME_PLACE_DEG)}`;
		const held = byPlace.get(key);
		if (!held) byPlace.set(key, { latest: item, count: 1 });
		else {
			held.count++;
			if (item.timeMs >= held.latest.timeMs) held.latest = item;
		}
	}
	const all = [...byPlace.values()].sort((a, b) => a.latest.timeMs - b.latest.timeMs);
	return { drawn: all.slice(Math.max(0, all.length - max)), places: all.length };
}
