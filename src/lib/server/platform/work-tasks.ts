/**
 * The work pool's tasks: name → function of one structured-cloneable input. Each is a thin call
 * into the pure modules; nothing here reads files, the database or the configuration (the server
 * reads those and passes the values in), so the worker entry can load this module alone. Hashing
 * (node:crypto) is the one thing here not from the pure modules: it is CPU work, not I/O.
 *
 * Results go back to the server's thread with their whole-buffer typed arrays transferred
 * (`buffersOf`); data that later tasks read again (a parsed sky map, a catalogue's index) is put in
 * SharedArrayBuffers here, once, so that posting it to the next task copies nothing.
 *
 * Adding a task: DEVELOPERS.md, "Heavy work: the work pool".
 */
import { analyseSkymap, readSkyMap, skyRaster, type ReadSkyMapOptions, type SkyMap, type SkymapSummary, type SkyRaster } from '../../sky/index.ts';
import { FitsError, FitsInflateLimitError } from '../../sky/fits.ts';
import { buildCatalogIndex, rankGalaxies, type CatalogIndex, type GalaxyCatalog, type RankOptions, type RankResult } from '../../targeting/galaxies.ts';
import { rankFields, tileSky, type FieldOfView, type FieldRankOptions, type FieldRanking, type Tiling } from '../../targeting/fields.ts';
import { planNetwork } from '../../targeting/plan.ts';
import type { NetworkPlan, PlanInput } from '../../targeting/plan-types.ts';
import {
	coverage,
	coverageWithState,
	extendCoverage,
	galaxyCoverage,
	type Coverage,
	type CoverageOptions,
	type CoverageState,
	type ExtendMode,
	type GalaxyProbability,
	type ObservedFootprint
} from '../../targeting/coverage.ts';
import { readSpectrum, SpectrumError, summariseSpectrum, type ReadSpectrumOptions, type Spectrum, type SpectrumSummary } from '../../candidates/spectrum.ts';
import { buildReport, type EventReport, type ReportInputs } from '../../closeout/report.ts';
import { absoluteMagB, readCatalogPart, type CatalogPartRows, type CatalogPartState } from '../../targeting/catalog-csv.ts';
import { radecToNest } from '../../sky/index.ts';
import { parsePointingCsv, type PointingCsvParse } from '../../coordination/pointings.ts';
import { readPhotometryUpload, type PhotometryParse } from '../../candidates/photometry.ts';
import { createHash } from 'node:crypto';
import { shareArrays } from './work-memory.ts';

/** Footprints as typed arrays: group by index into `groupIds`; shape 0 rectangle (width × height), 1 circle (diameter = width). */
export interface PackedFootprints {
	raDeg: Float64Array;
	decDeg: Float64Array;
	timeMs: Float64Array;
	width: Float64Array;
	height: Float64Array;
	circle: Uint8Array;
	group: Int32Array;
	groupIds: string[];
}

export function packFootprints(fps: ObservedFootprint[]): PackedFootprints {
	const groupIds: string[] = [];
	const index = new Map<string, number>();
	const group = Int32Array.from(fps, (f) => {
		let g = index.get(f.groupId);
		if (g === undefined) {
			g = groupIds.length;
			groupIds.push(f.groupId);
			index.set(f.groupId, g);
		}
		return g;
	});
	return {
		raDeg: Float64Array.from(fps, (f) => f.raDeg),
		decDeg: Float64Array.from(fps, (f) => f.decDeg),
		timeMs: Float64Array.from(fps, (f) => f.timeMs),
		width: Float64Array.from(fps, (f) => (f.shape === 'circle' ? f.diameterDeg : f.widthDeg)),
		height: Float64Array.from(fps, (f) => (f.shape === 'circle' ? f.diameterDeg : f.heightDeg)),
		circle: Uint8Array.from(fps, (f) => (f.shape === 'circle' ? 1 : 0)),
		group,
		groupIds
	};
}

/** Footprints back as objects; ids are their positions from `firstId` on (the server knows the real ones by position). */
export function unpackFootprints(p: PackedFootprints, firstId = 0): ObservedFootprint[] {
	return Array.from(p.raDeg, (raDeg, k) => {
		const base = { id: String(firstId + k), groupId: p.groupIds[p.group[k]], timeMs: p.timeMs[k], raDeg, decDeg: p.decDeg[k] };
		return p.circle[k] ? { ...base, shape: 'circle' as const, diameterDeg: p.width[k] } : { ...base, shape: 'rectangle' as const, widthDeg: p.width[k], heightDeg: p.height[k] };
	});
}

/** `CoverageState` with its footprints packed (ids are input positions). */
export type PackedCoverageState = Omit<CoverageState, 'ranked'> & { footprints: PackedFootprints };

function packState(state: CoverageState): PackedCoverageState {
	const { ranked, ...rest } = state;
	return { ...rest, footprints: packFootprints(ranked) };
}

function unpackState(p: PackedCoverageState): CoverageState {
	const { footprints, ...rest } = p;
	const ranked = unpackFootprints(footprints);
	// Ids are input positions: rank r is input inputOf[r].
	ranked.forEach((f, r) => (f.id = String(p.inputOf[r])));
	return { ...rest, ranked };
}

/** What the event's coverage needs back, per input position, in typed arrays. */
export interface EventCoverageFigures {
	mode: ExtendMode;
	state: PackedCoverageState;
	union: number;
	errorBound: number;
	sumOfFootprints: number;
	groups: Omit<Coverage['groups'][number], 'curve'>[];
	ownByInput: Float64Array;
	/** Union after each input's observation (inputs are in time order for the event's rows). */
	curveByInput: Float64Array;
	/** The input's group's union after it. */
	groupCurveByInput: Float64Array;
	galaxies: { observedCount: number; observedProbability: number; curve: [number, number][]; byTeam: [string, number][] } | null;
}

/** A catalogue as the index task takes it: the names stay on the server's thread (a million strings would be copied). */
export type CatalogColumns = Omit<GalaxyCatalog, 'id'>;
/** An index whose catalogue has no names; the server puts them back (`rankings.ts`). */
export type SharedCatalogIndex = Omit<CatalogIndex, 'catalog'> & { catalog: CatalogColumns };

export const TASKS = {
	/** Read and analyse a sky map, and draw its display raster; the bytes come back for storing, with their sha256. */
	analyseSkymap(input: { bytes: Uint8Array; read: ReadSkyMapOptions; raster: { width: number; height: number } }): {
		summary: SkymapSummary;
		map: SkyMap;
		display: SkyRaster;
		bytes: Uint8Array;
		sha256: string;
	} {
		const { map, ...summary } = analyseSkymap(input.bytes, input.read);
		const display = skyRaster(map, input.raster);
		const sha256 = createHash('sha256').update(input.bytes).digest('hex');
		return { summary, map: shareArrays(map), display, bytes: input.bytes, sha256 };
	},

	/** Read a stored sky map (the cache's miss). */
	readSkyMap(input: { bytes: Uint8Array; read?: ReadSkyMapOptions }): SkyMap {
		return shareArrays(readSkyMap(input.bytes, input.read));
	},

	/** Bucket a catalogue's galaxies by sky pixel. */
	buildCatalogIndex(input: { catalog: CatalogColumns; order: number }): SharedCatalogIndex {
		const index = buildCatalogIndex({ ...input.catalog, id: [] }, input.order);
		const { id: _names, ...catalog } = index.catalog;
		return shareArrays({ ...index, catalog });
	},

	/** Galaxies of an index, and fields of each tiling, ranked inside a map's credible region. */
	rankTargets(input: {
		map: SkyMap;
		index: SharedCatalogIndex | null;
		galaxies: RankOptions;
		tilings: { key: string; tiling: Tiling }[];
		fields: FieldRankOptions;
	}): { galaxies: RankResult | null; fields: { key: string; ranking: FieldRanking }[] } {
		// The names are not needed to rank: rows are answered, and the server maps them to its own ids.
		const galaxies = input.index ? rankGalaxies(input.map, { ...input.index, catalog: { ...input.index.catalog, id: [] } }, input.galaxies) : null;
		const fields = input.tilings.map(({ key, tiling }) => ({ key, ranking: rankFields(input.map, tiling, input.fields) }));
		return { galaxies, fields };
	},

	/** Tile the sky for a field of view. */
	tileSky(input: { fov: FieldOfView }): Tiling {
		return tileSky(input.fov);
	},

	/** The network plan. */
	planNetwork(input: PlanInput): NetworkPlan {
		return planNetwork(input);
	},

	/** Union coverage of footprints on a map. */
	coverage(input: { map: SkyMap; observed: ObservedFootprint[]; options: CoverageOptions }): Coverage {
		return coverage(input.map, input.observed, input.options);
	},

	/**
	 * An event's coverage: `added` footprints added to the union of `state` (null: computed afresh
	 * from `added`), visiting only the sky they touch (`extendCoverage`); and, with `galaxies`,
	 * the ranked galaxy probability observed, overall and per team (footprints of the team plus
	 * galaxies its completed claims name). Footprints and state cross as typed arrays (posting
	 * thousands of small objects costs the server's thread more than the extension itself); the
	 * figures come back per input position (inputs: the state's, then `added`).
	 */
	eventCoverage(input: {
		map: SkyMap;
		state: PackedCoverageState | null;
		added: PackedFootprints;
		options: CoverageOptions;
		galaxies: { ranked: GalaxyProbability[]; claims: { targetId: string; teamId: string }[]; teamIds: string[] } | null;
	}): EventCoverageFigures {
		const added = unpackFootprints(input.added, input.state?.footprints.timeMs.length ?? 0);
		const union = input.state
			? extendCoverage(input.map, unpackState(input.state), added, input.options)
			: { ...coverageWithState(input.map, added, input.options), mode: 'recomputed' as const };
		const c = union.coverage;
		const n = c.footprints.length;
		const curveByInput = new Float64Array(n);
		const groupCurveByInput = new Float64Array(n);
		const inputOf = union.state.inputOf;
		c.curve.forEach((p, r) => (curveByInput[inputOf[r]] = p.union));
		const rankOfId = new Map(union.state.ranked.map((f, r) => [f.id, r]));
		for (const g of c.groups) for (const p of g.curve) groupCurveByInput[inputOf[rankOfId.get(p.id)!]] = p.union;
		let galaxies = null;
		if (input.galaxies) {
			const { ranked, claims, teamIds } = input.galaxies;
			const all = union.state.ranked;
			const overall = galaxyCoverage(ranked, { galaxyIds: claims.map((k) => k.targetId), footprints: all });
			const byTeam = teamIds.map((teamId): [string, number] => [
				teamId,
				galaxyCoverage(ranked, { galaxyIds: claims.filter((k) => k.teamId === teamId).map((k) => k.targetId), footprints: all.filter((f) => f.groupId === teamId) }).observedProbability
			]);
			galaxies = { observedCount: overall.observedCount, observedProbability: overall.observedProbability, curve: overall.curve.map((p) => [p.timeMs, p.probability] as [number, number]), byTeam };
		}
		return {
			mode: union.mode,
			state: packState(union.state),
			union: c.union,
			errorBound: c.errorBound,
			sumOfFootprints: c.sumOfFootprints,
			groups: c.groups.map(({ curve: _curve, ...g }) => g),
			ownByInput: Float64Array.from(c.footprints, (f) => f.probability),
			curveByInput,
			groupCurveByInput,
			galaxies
		};
	},

	/** The event's report from its rows (its union coverage by team and by filter is most of the work). */
	buildReport(input: ReportInputs): EventReport {
		return buildReport(input);
	},

	/**
	 * Read one part of a catalogue file (its bytes moved here) after the reading state of the
	 * part before: rows checked except for duplicate ids, with each galaxy's NESTED pixel at
	 * `pixelOrder` and its M_B (NaN without one) for storing.
	 */
	readCatalogPart(input: { state: CatalogPartState; bytes: Uint8Array; final: boolean; pixelOrder: number }): {
		state: CatalogPartState;
		rows: CatalogPartRows;
		pixel: Int32Array;
		bAbsMag: Float64Array;
	} {
		const { state, rows } = readCatalogPart(input.state, input.bytes, input.final);
		const pixel = new Int32Array(rows.size);
		const bAbsMag = new Float64Array(rows.size);
		for (let i = 0; i < rows.size; i++) {
			if (Number.isNaN(rows.raDeg[i])) continue;
			pixel[i] = radecToNest(input.pixelOrder, rows.raDeg[i], rows.decDeg[i]);
			bAbsMag[i] = absoluteMagB(rows.luminosityB10[i]) ?? NaN;
		}
		return { state, rows, pixel, bAbsMag };
	},

	/** Read an uploaded CSV of pointings and check each row's own rules (the server then checks telescope, event and fields). */
	readPointingCsv(input: { text: string }): PointingCsvParse {
		return parsePointingCsv(input.text);
	},

	/** Read an uploaded photometry CSV and check each row; with its points, their lines for the checks against the store. */
	readPhotometryUpload(input: { text: string }): { parse: PhotometryParse; lines: number[] } {
		return readPhotometryUpload(input.text);
	},

	/** Read a spectrum file (ASCII, FITS table or 1-D image) and summarise it; the bytes come back for storing. */
	readSpectrum(input: { bytes: Uint8Array; options: ReadSpectrumOptions }): { spectrum: Spectrum; summary: SpectrumSummary; bytes: Uint8Array } {
		const spectrum = readSpectrum(input.bytes, input.options);
		return { spectrum, summary: summariseSpectrum(spectrum), bytes: input.bytes };
	}
} as const;

export type TaskName = keyof typeof TASKS;
export type TaskInput<K extends TaskName> = Parameters<(typeof TASKS)[K]>[0];
export type TaskOutput<K extends TaskName> = ReturnType<(typeof TASKS)[K]>;

/**
 * Errors the pure modules throw that callers tell apart by class: a task's error is rebuilt on
 * the server's thread as the same class with the same fields (postMessage alone would give a
 * plain Error). Add a module's error class here when a task of yours throws it.
 */
export const ERROR_CLASSES: Record<string, new (...args: never[]) => Error> = {
	FitsError,
	FitsInflateLimitError,
	SpectrumError
};
