import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { readSkyMap } from '../sky/index.ts';
import { buildReport, type ReportInputs, type ReportObservationInput } from './report.ts';
import { apparentMagnitude, distanceModulus } from './kilonova.ts';
import { bulletinText, reportMarkdown } from './markdown.ts';

/**
 * Reference: tests/fixtures/closeout/report_reference.json, made by make_report_reference.py with
 * Debian's healpy (query_polygon / query_disc, inclusive=False, at order 10) and astropy
 * (Distance.distmod) on the same map, footprints and galaxies. Versions in VERSIONS.md there.
 */
interface Pointing {
	id: string;
	team: string;
	filter: string;
	minutesAfterMerger: number;
	shape: 'rectangle' | 'circle';
	raDeg: number;
	decDeg: number;
	widthDeg?: number;
	heightDeg?: number;
	diameterDeg?: number;
	exposureS: number;
	limitingMag: number;
}
const ref = JSON.parse(readFileSync('tests/fixtures/closeout/report_reference.json', 'utf8')) as {
	referenceOrder: number;
	merger: string;
	distanceMpc: [number, number];
	pointings: Pointing[];
	notices: { kind: string; authoredAt: string; receivedAt: string }[];
	acknowledged: string;
	galaxies: { id: string; raDeg: number; decDeg: number; probability: number }[];
	expected: {
		sky: number;
		sumOfFootprints: number;
		galaxies: number;
		byTeam: Record<string, { sky: number; galaxies: number }>;
		byFilter: Record<string, { sky: number; galaxies: number }>;
		curve: { id: string; hoursSinceMerger: number; sky: number; galaxies: number }[];
		delaysS: { firstNoticeReceived: number; acknowledged: number; firstObservation: number; acknowledgedAfterNotice: number };
		kilonovaMag: number;
		kilonovaMagFar: number;
	};
};
const map = readSkyMap(new Uint8Array(readFileSync('tests/fixtures/sky/moc_map.fits')));
const mergerMs = Date.parse(ref.merger);

const observations: ReportObservationInput[] = ref.pointings.map((p) => ({
	id: p.id,
	observedAt: new Date(mergerMs + p.minutesAfterMerger * 60_000).toISOString(),
	raDeg: p.raDeg,
	decDeg: p.decDeg,
	footprint: p.shape === 'rectangle' ? { shape: 'rectangle', widthDeg: p.widthDeg!, heightDeg: p.heightDeg! } : { shape: 'circle', diameterDeg: p.diameterDeg! },
	filter: p.filter,
	exposureS: p.exposureS,
	limitingMag: p.limitingMag,
	teamId: `team-${p.team}`,
	teamName: p.team,
	telescopeId: `scope-${p.team}`,
	telescopeName: `${p.team} 1.2 m`
}));

function inputs(): ReportInputs {
	return {
		event: {
			eventId: 'ev1',
			sourceEventId: 'S260301a',
			state: 'closed',
			role: 'observation',
			mergerTime: ref.merger,
			farPerYear: 0.01,
			classification: { BNS: 0.9, NSBH: 0.05, BBH: 0, Terrestrial: 0.05 },
			skymapId: 'm1',
			area50Deg2: 40,
			area90Deg2: 160,
			distanceMeanMpc: ref.distanceMpc[0],
			distanceStdMpc: ref.distanceMpc[1],
			closedAt: '2026-03-03T10:00:00.000Z'
		},
		notices: ref.notices.map((n) => ({ ...n, role: 'observation' })),
		acknowledgedAt: ref.acknowledged,
		map,
		observations,
		galaxies: ref.galaxies,
		galaxiesRanked: 1200,
		candidates: [],
		classifications: 0,
		deeds: [
			{ person: 'Ana Duty', team: null, deed: 'acknowledged' },
			{ person: 'Bo Ridge', team: 'Ridge', deed: 'observed' },
			{ person: 'Bo Ridge', team: 'Ridge', deed: 'claimed' },
			{ person: null, team: 'Harbour', deed: 'observed' }
		],
		annotation: { text: 'Weather lost the second night at two sites.', updatedBy: 'Cy Coord', updatedAt: '2026-03-03T11:00:00.000Z' },
		generatedAt: '2026-03-03T12:00:00.000Z'
	};
}

describe('buildReport against healpy', () => {
	const report = buildReport(inputs(), { evaluationOrder: ref.referenceOrder });

	it('covers the union of footprints, not their sum', () => {
		expect.assertions(3);
		expect(report.coverage.sky).toBeCloseTo(ref.expected.sky, 9);
		expect(report.coverage.sumOfFootprints).toBeCloseTo(ref.expected.sumOfFootprints, 9);
		// The scenario overlaps on purpose: adding footprints would claim far more.
		expect(ref.expected.sumOfFootprints - ref.expected.sky).toBeGreaterThan(0.1);
	});

	it('gives each team and each filter the union of its own footprints and its galaxy share', () => {
		expect.assertions(2 * (Object.keys(ref.expected.byTeam).length + Object.keys(ref.expected.byFilter).length) + 2);
		expect(report.coverage.byTeam.map((t) => t.team).sort()).toEqual(Object.keys(ref.expected.byTeam).sort());
		for (const t of report.coverage.byTeam) {
			expect(t.sky).toBeCloseTo(ref.expected.byTeam[t.team].sky, 9);
			expect(t.galaxies).toBeCloseTo(ref.expected.byTeam[t.team].galaxies, 12);
		}
		expect(report.coverage.byFilter.map((f) => f.filter).sort()).toEqual(Object.keys(ref.expected.byFilter).sort());
		for (const f of report.coverage.byFilter) {
			expect(f.sky).toBeCloseTo(ref.expected.byFilter[f.filter].sky, 9);
			expect(f.galaxies).toBeCloseTo(ref.expected.byFilter[f.filter].galaxies, 12);
		}
	});

	it('gives the galaxy share inside footprints and the curve against time since merger', () => {
		expect.assertions(1 + 1 + 3 * ref.expected.curve.length);
		expect(report.coverage.galaxies).toBeCloseTo(ref.expected.galaxies, 12);
		expect(report.coverage.curve).toHaveLength(ref.expected.curve.length);
		report.coverage.curve.forEach((p, k) => {
			expect(p.hoursSinceMerger).toBeCloseTo(ref.expected.curve[k].hoursSinceMerger, 9);
			expect(p.sky).toBeCloseTo(ref.expected.curve[k].sky, 9);
			expect(p.galaxies).toBeCloseTo(ref.expected.curve[k].galaxies, 12);
		});
	});

	it('at the default edge resolution stays within its stated bound of healpy', () => {
		expect.assertions(2);
		const coarse = buildReport(inputs());
		expect(Math.abs(coarse.coverage.sky! - ref.expected.sky)).toBeLessThanOrEqual(coarse.coverage.errorBound!);
		expect(Math.abs(coarse.coverage.sky! - ref.expected.sky)).toBeLessThan(2e-3);
	});

	it('times the notice, the acknowledgement and the first observation from the merger', () => {
		expect.assertions(6);
		expect(report.times.firstNoticeReceived).toBe(ref.notices[0].receivedAt);
		expect(report.times.acknowledged).toBe(ref.acknowledged);
		expect(report.delaysS.firstNoticeReceived).toBeCloseTo(ref.expected.delaysS.firstNoticeReceived, 6);
		expect(report.delaysS.acknowledged).toBeCloseTo(ref.expected.delaysS.acknowledged, 6);
		expect(report.delaysS.firstObservation).toBeCloseTo(ref.expected.delaysS.firstObservation, 6);
		expect(report.delaysS.acknowledgedAfterNotice).toBeCloseTo(ref.expected.delaysS.acknowledgedAfterNotice, 6);
	});

	it('puts the expected kilonova where astropy’s distance modulus does', () => {
		expect.assertions(4);
		expect(report.kilonova!.expectedMag).toBeCloseTo(ref.expected.kilonovaMag, 9);
		expect(report.kilonova!.expectedMagFar).toBeCloseTo(ref.expected.kilonovaMagFar, 9);
		// 10 pc is modulus 0 by definition; 1 Mpc is 25.
		expect(distanceModulus(1e-5)).toBeCloseTo(0, 12);
		expect(apparentMagnitude(-16, 1)).toBeCloseTo(9, 12);
	});

	it('counts, sums exposure and sets the depth against the kilonova per telescope and filter', () => {
		expect.assertions(6);
		expect(report.counts).toEqual({ notices: 2, observations: 8, candidates: 0, classifications: 0 });
		const ridge = report.telescopes.find((t) => t.team === 'Ridge')!;
		const own = ref.pointings.filter((p) => p.team === 'Ridge');
		expect(ridge.observations).toBe(own.length);
		expect(ridge.exposureS).toBe(own.reduce((s, p) => s + p.exposureS, 0));
		const r = ridge.filters.find((f) => f.filter === 'r')!;
		const rLimits = own.filter((p) => p.filter === 'r').map((p) => p.limitingMag);
		expect(r.deepestLimitingMag).toBe(Math.max(...rLimits));
		expect(r.medianLimitingMag).toBeCloseTo((rLimits[0] + rLimits[1]) / 2, 12);
		expect(r.marginMag).toBeCloseTo(r.medianLimitingMag - ref.expected.kilonovaMag, 9);
	});

	it('lists who did what, once each', () => {
		expect.assertions(2);
		expect(report.participants.people).toEqual([
			{ name: 'Ana Duty', deeds: ['acknowledged'] },
			{ name: 'Bo Ridge', deeds: ['claimed', 'observed'] }
		]);
		expect(report.participants.teams.map((t) => t.name)).toEqual(['Harbour', 'Ridge']);
	});

	it('writes the same numbers into the Markdown and the bulletin', () => {
		expect.assertions(8);
		const md = reportMarkdown(report);
		expect(md).toContain(`**${(ref.expected.sky * 100).toFixed(1)}%**`);
		expect(md).toContain(`**${(ref.expected.galaxies * 100).toFixed(1)}%**`);
		expect(md).toContain(`| Ridge | 3 | ${(ref.expected.byTeam.Ridge.sky * 100).toFixed(1)}% | ${(ref.expected.byTeam.Ridge.galaxies * 100).toFixed(1)}% |`);
		expect(md).toContain('> Weather lost the second night at two sites.');
		expect(md).toContain(`m ≈ ${ref.expected.kilonovaMag.toFixed(1)}`);
		const text = bulletinText(report);
		expect(text).toContain(`cover ${(ref.expected.sky * 100).toFixed(1)}% of the probability`);
		expect(text).toContain('35 min after the merger');
		expect(text).toContain('No candidate counterparts were reported.');
	});

	it('gives null coverage without a map and keeps the counts', () => {
		expect.assertions(3);
		const none = buildReport({ ...inputs(), map: null, galaxies: [] });
		expect(none.coverage.sky).toBeNull();
		expect(none.coverage.galaxies).toBeNull();
		expect(none.counts.observations).toBe(8);
	});
});
