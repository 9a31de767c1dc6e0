/** Plain data the sky view draws; every direction is ICRS RA/Dec in degrees. */
import type { FootprintShape } from '../targeting/sky-geometry.ts';

export type TargetState = 'open' | 'claimed' | 'observing' | 'done' | 'mine';

export interface SkyTarget {
	id: string;
	kind: 'galaxy' | 'field';
	raDeg: number;
	decDeg: number;
	state: TargetState;
	/** Fields: the footprint drawn; galaxies are dots. */
	footprint?: FootprintShape;
	/** Fields: the telescope whose tiling the field belongs to (the one that can claim it). */
	telescopeId?: string;
	label?: string;
	/** Extra lines for the hover card (probability, distance, who claimed it…). */
	details?: string[];
}

export type SkyFootprint = { id: string; raDeg: number; decDeg: number; label?: string; groupId?: string } & FootprintShape;

/** How many pointings stand behind the footprints drawn (repeats at one place are drawn once; busy events draw the latest places). */
export interface FootprintCount {
	pointings: number;
	places: number;
	drawn: number;
}

export interface SkyCandidate {
	id: string;
	raDeg: number;
	decDeg: number;
	label?: string;
	details?: string[];
	/** The candidate's page: a click on the marker opens it. */
	href?: string;
}

/** The Sun or Moon with the radius of the zone telescopes avoid round it. */
export interface SkyBody {
	raDeg: number;
	decDeg: number;
	avoidRadiusDeg: number;
	/** Moon only: illuminated fraction 0…1. */
	illumination?: number;
}

export interface SkyContour {
	level: number;
	lines: [number, number][][];
}

/**
 * The stored display raster (src/lib/sky/raster.ts) packed for the browser: one byte per cell.
 * `density` is √(ρ/ρ_max)·255 (a square root shows the wings without flattening the peak) and
 * `level` the credible level·255. Rows from Dec +90, RA increasing along a row from 0.
 */
export interface DisplayRaster {
	width: number;
	height: number;
	peakDensityPerSr: number;
	density: string;
	level: string;
}
