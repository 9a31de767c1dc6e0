/**
 * The event report, computed from the stored rows alone so that it can be made again at any time
 * and gives the same numbers: times, notices, the final map, what the observations covered
 * (the union of footprints on the map, every bit of sky once, and the share of the ranked galaxy
 * probability inside them) in total, per team and per filter with the curve against time since
 * the merger, telescopes and depth against an expected kilonova, candidates, participants.
 *
 * The union is `coverage()` and the galaxy share `galaxyCoverage()` (targeting/coverage.ts);
 * both are checked against healpy in tests/fixtures/closeout and tests/fixtures/coverage.
 */
import type { SkyMap } from '../sky/index.ts';
import { coverage, galaxyCoverage, type CoverageOptions, type ObservedFootprint } from '../targeting/coverage.ts';
import type { FootprintShape } from '../targeting/sky-geometry.ts';
import { kilonovaExpectation, type KilonovaExpectation } from './kilonova.ts';

// ───────────── inputs (plain rows) ─────────────

export interface ReportEventInput {
	eventId: string;
	sourceEventId: string;
	state: string;
	role: string;
	/** Merger time, ISO 8601; null when the notices gave none. */
	mergerTime: string | null;
	farPerYear: number | null;
	classification: Record<string, number | null> | null;
	skymapId: string | null;
	area50Deg2: number | null;
	area90Deg2: number | null;
	distanceMeanMpc: number | null;
	distanceStdMpc: number | null;
	closedAt: string | null;
}

export interface ReportNoticeInput {
	kind: string;
	role: string;
	authoredAt: string;
	/** When the notice reached our inbox; null for notices that came without one. */
	receivedAt: string | null;
}

export interface ReportObservationInput {
	id: string;
	observedAt: string;
	raDeg: number;
	decDeg: number;
	footprint: FootprintShape;
	filter: string;
	exposureS: number;
	limitingMag: number;
	teamId: string;
	teamName: string;
	telescopeId: string;
	telescopeName: string;
}

export interface ReportGalaxyInput {
	id: string;
	raDeg: number;
	decDeg: number;
	/** Share of the whole ranking's probability (the stored rankings are normalised over every galaxy ranked). */
	probability: number;
}

export interface ReportCandidate {
	name: string;
	raDeg: number;
	decDeg: number;
	discoveredAt: string;
	discoveryMag: number;
	discoveryFilter: string;
	team: string;
	reportedBy: string;
	state: string;
	vetting: {
		verdict: string | null;
		credibleLevel: number | null;
		host: string | null;
		hostDistancePValue: number | null;
		absoluteMag: number | null;
		reasons: string[];
	};
	photometry: {
		detections: number;
		upperLimits: number;
		filters: { filter: string; detections: number; upperLimits: number; rateMagPerDay: number | null; rateErr: number | null }[];
	};
	classification: {
		status: string;
		label: string | null;
		text: string;
		opinions: { label: string; confidence: string; author: string; redshift: number | null; at: string }[];
	};
}

export type ParticipantDeed = 'acknowledged' | 'claimed' | 'observed' | 'reported a candidate' | 'photometry' | 'spectrum' | 'classified' | 'decided' | 'closed' | 'reopened';

export interface ReportDeedInput {
	person: string | null;
	team: string | null;
	deed: ParticipantDeed;
}

export interface ReportAnnotation {
	text: string;
	updatedBy: string | null;
	updatedAt: string;
}

export interface ReportInputs {
	event: ReportEventInput;
	notices: ReportNoticeInput[];
	/** The first acknowledgement of a duty page for the event, ISO 8601; null when none. */
	acknowledgedAt: string | null;
	/** The event's current sky map; null without a usable one (coverage is then null). */
	map: SkyMap | null;
	observations: ReportObservationInput[];
	galaxies: ReportGalaxyInput[];
	/** Galaxies in the ranking (the stored list may hold only the best of them). */
	galaxiesRanked: number;
	candidates: ReportCandidate[];
	classifications: number;
	deeds: ReportDeedInput[];
	annotation: ReportAnnotation | null;
	generatedAt: string;
}

// ───────────── the report ─────────────

export interface ShareRow {
	sky: number | null;
	galaxies: number | null;
	observations: number;
}

export interface EventReport {
	generatedAt: string;
	event: ReportEventInput;
	times: { merger: string | null; firstNoticeReceived: string | null; acknowledged: string | null; firstObservation: string | null };
	/** Seconds after the merger (null without a merger time or without the moment). */
	delaysS: { firstNoticeReceived: number | null; acknowledged: number | null; firstObservation: number | null; acknowledgedAfterNotice: number | null };
	notices: ReportNoticeInput[];
	coverage: {
		/** Probability in the union of every footprint (each bit of sky once); null without a map. */
		sky: number | null;
		/** Share of the ranked galaxy probability inside observed footprints; null without a ranking. */
		galaxies: number | null;
		/** What adding each footprint's own probability would claim (overlaps counted again). */
		sumOfFootprints: number | null;
		/** Pixelisation bound on |sky − exact union| (coverage.ts). */
		errorBound: number | null;
		byTeam: (ShareRow & { team: string })[];
		byFilter: (ShareRow & { filter: string })[];
		curve: { hoursSinceMerger: number | null; at: string; sky: number | null; galaxies: number | null }[];
		galaxiesRanked: number;
		skymapId: string | null;
	};
	counts: { notices: number; observations: number; candidates: number; classifications: number };
	kilonova: KilonovaExpectation | null;
	telescopes: {
		telescope: string;
		team: string;
		observations: number;
		exposureS: number;
		filters: {
			filter: string;
			observations: number;
			exposureS: number;
			deepestLimitingMag: number;
			medianLimitingMag: number;
			/** Median limiting magnitude − expected kilonova magnitude: positive = deep enough. */
			marginMag: number | null;
		}[];
	}[];
	candidates: ReportCandidate[];
	participants: { people: { name: string; deeds: ParticipantDeed[] }[]; teams: { name: string; deeds: ParticipantDeed[] }[] };
	annotation: ReportAnnotation | null;
}

const ms = (iso: string) => Date.parse(iso);
const minIso = (xs: (string | null)[]): string | null => {
	let best: string | null = null;
	for (const x of xs) if (x !== null && (best === null || ms(x) < ms(best))) best = x;
	return best;
};

function median(xs: number[]): number {
	const s = [...xs].sort((a, b) => a - b);
	const m = s.length >> 1;
	return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
}

/**
 * The report of one event from its rows. `options` reach `coverage()` (a fixed evaluation order
 * makes the union healpy's pixel sum at that order, which the tests use).
 */
export function buildReport(inputs: ReportInputs, options: Pick<CoverageOptions, 'evaluationOrder' | 'pixelsAcross'> = {}): EventReport {
	const { event, observations } = inputs;
	const mergerMs = event.mergerTime ? ms(event.mergerTime) : null;
	const since = (iso: string | null) => (iso === null || mergerMs === null ? null : (ms(iso) - mergerMs) / 1000);

	const firstNoticeReceived = minIso(inputs.notices.map((n) => n.receivedAt));
	const firstObservation = minIso(observations.map((o) => o.observedAt));
	const times = { merger: event.mergerTime, firstNoticeReceived, acknowledged: inputs.acknowledgedAt, firstObservation };
	const delaysS = {
		firstNoticeReceived: since(firstNoticeReceived),
		acknowledged: since(inputs.acknowledgedAt),
		firstObservation: since(firstObservation),
		acknowledgedAfterNotice: inputs.acknowledgedAt && firstNoticeReceived ? (ms(inputs.acknowledgedAt) - ms(firstNoticeReceived)) / 1000 : null
	};

	// ── coverage: by team (the curve and the totals) and by filter ──
	const footprintsBy = (group: (o: ReportObservationInput) => string): ObservedFootprint[] =>
		observations.map((o) => ({ id: o.id, groupId: group(o), timeMs: ms(o.observedAt), raDeg: o.raDeg, decDeg: o.decDeg, ...o.footprint }));
	const byTeamFps = footprintsBy((o) => o.teamName);
	const byFilterFps = footprintsBy((o) => o.filter);
	const covOptions: CoverageOptions = { ...options, mergerTimeMs: mergerMs ?? undefined };
	const teamCov = inputs.map && observations.length ? coverage(inputs.map, byTeamFps, covOptions) : null;
	const filterCov = inputs.map && observations.length ? coverage(inputs.map, byFilterFps, covOptions) : null;
	const hasGalaxies = inputs.galaxies.length > 0;
	// Stored probabilities are shares of the whole ranking, so the sum inside is already the share.
	const teamGal = hasGalaxies ? galaxyCoverage(galaxyInputs(inputs.galaxies), { footprints: byTeamFps }) : null;
	const filterGal = hasGalaxies ? galaxyCoverage(galaxyInputs(inputs.galaxies), { footprints: byFilterFps }) : null;
	const noMapSky = inputs.map ? 0 : null;

	const countBy = (key: (o: ReportObservationInput) => string) => {
		const m = new Map<string, number>();
		for (const o of observations) m.set(key(o), (m.get(key(o)) ?? 0) + 1);
		return m;
	};
	const shareRows = (counts: Map<string, number>, cov: typeof teamCov, gal: typeof teamGal) =>
		[...counts].map(([name, n]) => ({
			name,
			sky: cov ? (cov.groups.find((g) => g.groupId === name)?.union ?? 0) : noMapSky,
			galaxies: gal ? (gal.groups.find((g) => g.groupId === name)?.probability ?? 0) : null,
			observations: n
		}));
	const byTeam = shareRows(countBy((o) => o.teamName), teamCov, teamGal)
		.map(({ name, ...r }) => ({ team: name, ...r }))
		.sort((a, b) => (b.sky ?? 0) - (a.sky ?? 0) || a.team.localeCompare(b.team));
	const byFilter = shareRows(countBy((o) => o.filter), filterCov, filterGal)
		.map(({ name, ...r }) => ({ filter: name, ...r }))
		.sort((a, b) => (b.sky ?? 0) - (a.sky ?? 0) || a.filter.localeCompare(b.filter));

	// Both curves follow the same time order (time, then input order), one point per observation.
	const ordered = observations.map((o, i) => ({ o, i })).sort((a, b) => ms(a.o.observedAt) - ms(b.o.observedAt) || a.i - b.i);
	const curve = ordered.map(({ o }, r) => ({
		hoursSinceMerger: mergerMs === null ? null : (ms(o.observedAt) - mergerMs) / 3_600_000,
		at: o.observedAt,
		sky: teamCov ? teamCov.curve[r].union : noMapSky,
		galaxies: teamGal ? teamGal.curve[r].probability : null
	}));

	const kilonova = kilonovaExpectation(event.distanceMeanMpc, event.distanceStdMpc);
	const telescopes = telescopeRows(observations, kilonova);

	return {
		generatedAt: inputs.generatedAt,
		event,
		times,
		delaysS,
		notices: [...inputs.notices].sort((a, b) => ms(a.authoredAt) - ms(b.authoredAt)),
		coverage: {
			sky: teamCov ? teamCov.union : noMapSky,
			galaxies: teamGal ? teamGal.observedProbability : null,
			sumOfFootprints: teamCov ? teamCov.sumOfFootprints : noMapSky,
			errorBound: teamCov ? teamCov.errorBound : noMapSky,
			byTeam,
			byFilter,
			curve,
			galaxiesRanked: inputs.galaxiesRanked,
			skymapId: event.skymapId
		},
		counts: { notices: inputs.notices.length, observations: observations.length, candidates: inputs.candidates.length, classifications: inputs.classifications },
		kilonova,
		telescopes,
		candidates: [...inputs.candidates].sort((a, b) => ms(a.discoveredAt) - ms(b.discoveredAt) || a.name.localeCompare(b.name)),
		participants: participants(inputs.deeds),
		annotation: inputs.annotation
	};
}

function galaxyInputs(galaxies: ReportGalaxyInput[]) {
	return galaxies.map((g) => ({ id: g.id, ra: g.raDeg, dec: g.decDeg, probability: g.probability }));
}

function telescopeRows(observations: ReportObservationInput[], kilonova: KilonovaExpectation | null): EventReport['telescopes'] {
	const byTelescope = new Map<string, ReportObservationInput[]>();
	for (const o of observations) byTelescope.set(o.telescopeId, [...(byTelescope.get(o.telescopeId) ?? []), o]);
	return [...byTelescope.values()]
		.map((list) => {
			const byFilter = new Map<string, ReportObservationInput[]>();
			for (const o of list) byFilter.set(o.filter, [...(byFilter.get(o.filter) ?? []), o]);
			return {
				telescope: list[0].telescopeName,
				team: list[0].teamName,
				observations: list.length,
				exposureS: list.reduce((s, o) => s + o.exposureS, 0),
				filters: [...byFilter]
					.map(([filter, os]) => {
						const med = median(os.map((o) => o.limitingMag));
						return {
							filter,
							observations: os.length,
							exposureS: os.reduce((s, o) => s + o.exposureS, 0),
							deepestLimitingMag: Math.max(...os.map((o) => o.limitingMag)),
							medianLimitingMag: med,
							marginMag: kilonova ? med - kilonova.expectedMag : null
						};
					})
					.sort((a, b) => a.filter.localeCompare(b.filter))
			};
		})
		.sort((a, b) => a.telescope.localeCompare(b.telescope));
}

const DEED_ORDER: ParticipantDeed[] = ['acknowledged', 'claimed', 'observed', 'reported a candidate', 'photometry', 'spectrum', 'classified', 'decided', 'closed', 'reopened'];

function participants(deeds: ReportDeedInput[]): EventReport['participants'] {
	const people = new Map<string, Set<ParticipantDeed>>();
	const teams = new Map<string, Set<ParticipantDeed>>();
	for (const d of deeds) {
		if (d.person) people.set(d.person, (people.get(d.person) ?? new Set()).add(d.deed));
		if (d.team) teams.set(d.team, (teams.get(d.team) ?? new Set()).add(d.deed));
	}
	const list = (m: Map<string, Set<ParticipantDeed>>) =>
		[...m].map(([name, s]) => ({ name, deeds: DEED_ORDER.filter((d) => s.has(d)) })).sort((a, b) => a.name.localeCompare(b.name));
	return { people: list(people), teams: list(teams) };
}
