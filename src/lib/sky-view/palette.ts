/**
 * Strainline's own colours for the sky view, from the design tokens in tailwind.config.ts:
 * the probability ramp runs from night through chirp teal to ember.
 */
import type { TargetState } from './types.ts';

/** Ramp stops: position 0…1 → RGB. */
export const PROBABILITY_RAMP: [number, [number, number, number]][] = [
	[0, [15, 19, 34]], // night-900
	[0.18, [47, 58, 92]], // night-600
	[0.4, [13, 104, 94]], // chirp-700
	[0.62, [34, 191, 169]], // chirp-400
	[0.82, [255, 154, 102]], // ember-300
	[1, [255, 243, 236]] // ember-50
];

/** Colour of the ramp at t ∈ [0, 1], linear between stops. */
export function rampColour(t: number): [number, number, number] {
	const x = Math.max(0, Math.min(1, t));
	for (let k = 1; k < PROBABILITY_RAMP.length; k++) {
		const [p1, c1] = PROBABILITY_RAMP[k];
		const [p0, c0] = PROBABILITY_RAMP[k - 1];
		if (x <= p1) {
			const f = (x - p0) / (p1 - p0);
			return [0, 1, 2].map((i) => Math.round(c0[i] + f * (c1[i] - c0[i]))) as [number, number, number];
		}
	}
	return PROBABILITY_RAMP[PROBABILITY_RAMP.length - 1][1];
}

export const STATE_COLOURS: Record<TargetState, string> = {
	open: '#55d6c3', // chirp-300
	claimed: '#ff9a66', // ember-300
	observing: '#f2571f', // ember-500
	done: '#8595bf', // night-300
	mine: '#eef1f8' // night-50
};

export const STATE_LABELS: Record<TargetState, string> = {
	open: 'open',
	claimed: 'claimed by another team',
	observing: 'being observed',
	done: 'observed',
	mine: 'claimed by my team'
};

export const SKY_COLOURS = {
	background: '#080b15', // night-950
	grid: '#5c6c9b', // night-400
	gridLabel: '#d9dfee', // night-100
	contour50: '#fff3ec', // ember-50
	contour90: '#90e8da', // chirp-200
	galacticPlane: '#b3bedb', // night-200
	// Observed sky is dimmed: a dark fill under a pale outline, distinct from the teal of the ramp.
	footprint: '#c6f4ec', // chirp-100
	footprintFill: '#0f1322', // night-900
	candidate: '#ffc2a0', // ember-200
	sun: '#ff7a45', // ember-400
	moon: '#d9dfee' // night-100
};
