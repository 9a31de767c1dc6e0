/**
 * Vetting of a transient candidate: where it lies in the merger's sky map, which catalogue galaxy
 * may host it and whether that galaxy's distance agrees with the merger's, how long after the merger
 * it was seen, how fast it fades and reddens, how bright it is, and what the kilonova-likeness rules
 * make of all that. Pure: takes a read sky map, galaxies, photometry and thresholds; returns numbers
 * and sentences. The server gathers the inputs and stores the result.
 */
import { credibleLevelsOfDensities, pixelAt, conditionalMoments, distanceTails, hasDistance, type SkyMap } from '../sky/index.ts';
import { nearbyGalaxies, type CatalogueGalaxy, type NearbyGalaxy } from './hosts.ts';
import {
	absoluteMagnitude,
	absoluteMagnitudeErr,
	brightestDetection,
	colourEvolution,
	MS_PER_DAY,
	summariseLightCurve,
	type ColourEvolution,
	type FilterSummary
} from './lightcurve.ts';
import type { PhotometryPoint } from './photometry.ts';
import { evaluateRules, type KilonovaAssessment, type KilonovaThresholds } from './rules.ts';

/**
 * Host search: galaxies within HOST_SEARCH_ARCSEC on the sky, and among those with a distance only
 * ones within HOST_MAX_PROJECTED_KPC in projection are taken as possible hosts. Short gamma-ray bursts,
 * the other face of neutron-star mergers, lie mostly within ~10 kpc of their hosts and rarely beyond
 * ~50 kpc (Fong & Berger 2013, ApJ 776, 18 — from memory); GW170817 lay about 2 kpc from NGC 4993
 * (from memory). 10′ holds 50 kpc down to about 17 Mpc.
 */
export const HOST_SEARCH_ARCSEC = 600;
export const HOST_MAX_PROJECTED_KPC = 50;

/** What the sky map says about one direction. */
export interface SkyLookup {
	/** Probability held by all pixels denser than the candidate's (0 = the peak, 1 = outside the map). */
	credibleLevel: number;
	/** Per steradian. */
	probabilityDensity: number;
	/** The ansatz parameters in that direction (Singer et al. 2016); null without distance information. */
	distMu: number | null;
	distSigma: number | null;
	/** Conditional distance mean and standard deviation in that direction, Mpc. */
	distanceMeanMpc: number | null;
	distanceStdMpc: number | null;
}

/**
 * Look up many directions in one map: one pass over the map for all credible levels
 * (`credibleLevelsOfDensities`), then each direction's pixel for density and distance ansatz.
 */
export function lookUpDirections(map: SkyMap, directions: readonly { raDeg: number; decDeg: number }[]): SkyLookup[] {
	const pixels = directions.map((d) => pixelAt(map, d.raDeg, d.decDeg));
	const densities = pixels.map((i) => (i < 0 ? 0 : map.probDensity[i]));
	const levels = credibleLevelsOfDensities(map, densities);
	return pixels.map((i, k) => {
		if (i < 0) return { credibleLevel: 1, probabilityDensity: 0, distMu: null, distSigma: null, distanceMeanMpc: null, distanceStdMpc: null };
		const mu = map.distMu?.[i] ?? NaN;
		const sigma = map.distSigma?.[i] ?? NaN;
		const norm = map.distNorm ? map.distNorm[i] : undefined;
		const usable = hasDistance(mu, sigma, norm);
		const moments = usable ? conditionalMoments(mu, sigma) : null;
		return {
			credibleLevel: densities[k] > 0 ? levels[k] : 1,
			probabilityDensity: densities[k],
			distMu: usable ? mu : null,
			distSigma: usable ? sigma : null,
			distanceMeanMpc: moments?.meanMpc ?? null,
			distanceStdMpc: moments?.stdMpc ?? null
		};
	});
}

/** A galaxy the event's ranking holds, with where it ranked. */
export interface RankedGalaxy extends CatalogueGalaxy {
	distanceErrMpc?: number | null;
	rank?: number | null;
	/** The galaxy's share of the ranked probability. */
	probability?: number | null;
}

export interface HostMatch {
	galaxy: NearbyGalaxy & { rank: number | null; probability: number | null; distanceErrMpc: number | null };
	/** F(host distance) under the merger's distance posterior in the candidate's direction. */
	distanceCdf: number | null;
	/** 2·min(F, 1 − F). */
	distancePValue: number | null;
}

export interface HostAssociation {
	searchRadiusArcsec: number;
	maxProjectedKpc: number;
	/** Galaxies searched (the event's ranked galaxies). */
	searched: number;
	/** Galaxies within the search radius, nearest on the sky first. */
	nearby: NearbyGalaxy[];
	/** The nearest in projection within maxProjectedKpc; null when none. */
	host: HostMatch | null;
	/** One sentence for people. */
	note: string;
}

/**
 * Possible hosts among `galaxies`: the one with the smallest projected separation within
 * HOST_MAX_PROJECTED_KPC, and its distance compared with the merger's distance posterior in the
 * candidate's direction (cumulative probability and two-sided tail probability; the galaxy's own
 * distance error is not folded in — it is shown beside it).
 */
export function associateHost(
	candidate: { raDeg: number; decDeg: number },
	galaxies: readonly RankedGalaxy[],
	sky: Pick<SkyLookup, 'distMu' | 'distSigma'> | null,
	options: { searchRadiusArcsec?: number; maxProjectedKpc?: number } = {}
): HostAssociation {
	const searchRadiusArcsec = options.searchRadiusArcsec ?? HOST_SEARCH_ARCSEC;
	const maxProjectedKpc = options.maxProjectedKpc ?? HOST_MAX_PROJECTED_KPC;
	const nearby = nearbyGalaxies(candidate, galaxies, searchRadiusArcsec);
	const byId = new Map(galaxies.map((g) => [g.id, g]));
	const within = nearby.filter((g) => g.projectedKpc !== null && g.projectedKpc <= maxProjectedKpc).sort((a, b) => a.projectedKpc! - b.projectedKpc!);
	const base = { searchRadiusArcsec, maxProjectedKpc, searched: galaxies.length, nearby };
	if (within.length === 0) {
		const note =
			galaxies.length === 0
				? 'No ranked galaxies to search (no catalogue, or the event is not ranked yet).'
				: nearby.length === 0
					? `No ranked galaxy within ${searchRadiusArcsec / 60}′.`
					: `${nearby.length} ranked galax${nearby.length === 1 ? 'y lies' : 'ies lie'} within ${searchRadiusArcsec / 60}′, none within ${maxProjectedKpc} kpc in projection.`;
		return { ...base, host: null, note };
	}
	const g = within[0];
	const source = byId.get(g.id);
	let distanceCdf: number | null = null;
	let distancePValue: number | null = null;
	if (sky?.distMu != null && sky.distSigma != null && g.distanceMpc !== null) {
		const t = distanceTails(g.distanceMpc, sky.distMu, sky.distSigma);
		if (!Number.isNaN(t.cdf)) {
			distanceCdf = t.cdf;
			distancePValue = Math.min(1, 2 * Math.min(t.cdf, t.sf));
		}
	}
	const name = g.name ?? g.id;
	const note =
		`${name}: ${g.separationArcsec.toFixed(1)}″ away, ${g.projectedKpc!.toFixed(1)} kpc in projection at ${g.distanceMpc!.toFixed(0)} Mpc` +
		(distancePValue === null ? '; the sky map gives no distance to compare with.' : `; two-sided p = ${distancePValue.toPrecision(2)} against the merger's distance in this direction.`);
	return {
		...base,
		host: {
			galaxy: { ...g, rank: source?.rank ?? null, probability: source?.probability ?? null, distanceErrMpc: source?.distanceErrMpc ?? null },
			distanceCdf,
			distancePValue
		},
		note
	};
}

export interface VettingInputs {
	candidate: { raDeg: number; decDeg: number; discoveredAtMs: number };
	/** The merger time (ms since 1970); null when the event has none. */
	mergerTimeMs: number | null;
	/** The direction looked up in the event's current map; null without a usable map. */
	sky: SkyLookup | null;
	/** Which map the lookup came from, and why there is none when `sky` is null (for people). */
	skymapId?: string | null;
	skyNote?: string | null;
	galaxies: readonly RankedGalaxy[];
	photometry: readonly PhotometryPoint[];
	thresholds: KilonovaThresholds;
	nowMs: number;
}

export interface CandidateVetting {
	computedAt: string;
	skymapId: string | null;
	sky: SkyLookup | null;
	/** Why the sky lookup is missing (no map yet, the map could not be read), else null. */
	skyNote: string | null;
	hosts: HostAssociation;
	timing: {
		mergerTime: string | null;
		/** Discovery − merger, hours; null without a merger time. */
		discoveryAfterMergerHours: number | null;
		/** Last detection − merger, days. */
		lastDetectionAfterMergerDays: number | null;
	};
	lightCurve: {
		points: number;
		filters: Record<string, FilterSummary>;
		/** The first colour pair of the thresholds that could be measured at two times, else null. */
		colour: Omit<ColourEvolution, 'pairs'> & { pairs: number } | null;
	};
	/** Brightest detection as an absolute magnitude (no K-correction or extinction). */
	absoluteMagnitude: { value: number; err: number; filter: string; apparentMag: number; distanceMpc: number; distanceFrom: 'host' | 'sky map' } | null;
	rules: KilonovaAssessment;
}

/** Assemble the vetting of one candidate from its gathered inputs. */
export function vetCandidate(inputs: VettingInputs): CandidateVetting {
	const { candidate, mergerTimeMs, sky, photometry, thresholds } = inputs;
	const hosts = associateHost(candidate, inputs.galaxies, sky);
	const filters = summariseLightCurve(photometry);
	let colour: CandidateVetting['lightCurve']['colour'] = null;
	for (const [blue, red] of thresholds.reddening.colours) {
		const c = colourEvolution(photometry, blue, red, { windowDays: thresholds.reddening.pairWindowDays });
		if (c.rateMagPerDay === null) continue;
		colour = { blue: c.blue, red: c.red, rateMagPerDay: c.rateMagPerDay, rateErr: c.rateErr, pairs: c.pairs.length };
		break;
	}
	const host = hosts.host?.galaxy ?? null;
	const distance =
		host?.distanceMpc != null
			? { mpc: host.distanceMpc, errMpc: host.distanceErrMpc ?? 0, from: 'host' as const }
			: sky?.distanceMeanMpc != null
				? { mpc: sky.distanceMeanMpc, errMpc: sky.distanceStdMpc ?? 0, from: 'sky map' as const }
				: null;
	const brightest = brightestDetection(photometry);
	const absolute =
		distance && brightest
			? {
					value: absoluteMagnitude(brightest.mag!, distance.mpc),
					err: absoluteMagnitudeErr(brightest.magErr!, distance.mpc, distance.errMpc),
					filter: brightest.filter,
					apparentMag: brightest.mag!,
					distanceMpc: distance.mpc,
					distanceFrom: distance.from
				}
			: null;
	const detections = photometry.filter((p) => p.mag !== null);
	const lastMs = detections.length ? Math.max(...detections.map((p) => p.timeMs)) : null;
	const rules = evaluateRules(
		{
			credibleLevel: sky?.credibleLevel ?? null,
			distancePValue: hosts.host?.distancePValue ?? null,
			mergerTime: mergerTimeMs,
			photometry,
			distanceMpc: distance?.mpc ?? null,
			distanceErrMpc: distance?.errMpc ?? null
		},
		thresholds
	);
	return {
		computedAt: new Date(inputs.nowMs).toISOString(),
		skymapId: inputs.skymapId ?? null,
		sky,
		skyNote: sky ? null : (inputs.skyNote ?? 'the event has no sky map'),
		hosts,
		timing: {
			mergerTime: mergerTimeMs === null ? null : new Date(mergerTimeMs).toISOString(),
			discoveryAfterMergerHours: mergerTimeMs === null ? null : (candidate.discoveredAtMs - mergerTimeMs) / 3_600_000,
			lastDetectionAfterMergerDays: mergerTimeMs === null || lastMs === null ? null : (lastMs - mergerTimeMs) / MS_PER_DAY
		},
		lightCurve: { points: photometry.length, filters, colour },
		absoluteMagnitude: absolute,
		rules
	};
}
