/**
 * A small world for the candidate tests: a team with a telescope, an event whose current sky map is
 * the multi-order fixture map (tests/fixtures/sky/moc_map.fits), a few ranked galaxies, people in
 * every role, a duty shift, and a candidate near the map's peak. Tests only.
 */
import { readFileSync } from 'node:fs';
import { eq } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { saveFile } from '../platform/storage';
import { loadSessionUser, type SessionUser } from '../people/auth';
import { addShift } from '../duty/paging';
import { SYSTEM } from '../platform/realtime';
import { reportCandidate } from './candidates';

const FIXTURES = new URL('../../../../tests/fixtures/', import.meta.url);
export const fixture = (path: string) => readFileSync(new URL(path, FIXTURES));

/** The kilonova-like fixture light curve's merger time (tests/fixtures/candidates/lightcurves.json). */
export const MERGER = new Date('2026-12-02T03:04:05Z');
/** "Now" for the tests: a week after the merger. */
export const NOW = new Date('2026-12-09T03:00:00Z');

let n = 0;

/** An address no other test of the run uses (the fake SMTP server keeps every message of the run). */
export const uniqueEmail = (name: string) => `${name.toLowerCase().replace(/[^a-z]+/g, '-')}-${process.pid}-${++n}@cand-work.test`;

export function person(name: string, roles: table.Role[], teamIds: string[] = []): SessionUser {
	const id = `user-${++n}`;
	db.insert(table.user).values({ id, email: uniqueEmail(name), name, passwordHash: 'unused' }).run();
	for (const role of roles) db.insert(table.userRole).values({ userId: id, role }).run();
	for (const teamId of teamIds) db.insert(table.teamMember).values({ teamId, userId: id }).run();
	return loadSessionUser(id)!;
}

export interface World {
	teamId: string;
	telescopeId: string;
	eventId: string;
	sourceEventId: string;
	skymapId: string;
	candidateId: string;
	candidateName: string;
	observer: SessionUser;
	spectroA: SessionUser;
	spectroB: SessionUser;
	coordinator: SessionUser;
	duty: SessionUser;
	viewer: SessionUser;
}

/** Store a sky-map file for an event and make it the event's current map. */
export function giveMap(eventId: string, bytes: Uint8Array, skymapId = `sm-${++n}`): string {
	const noticeId = `no-${++n}`;
	db.insert(table.notice)
		.values({ id: noticeId, eventId, ivorn: `ivo://test.invalid/cand#${noticeId}`, kind: 'initial', role: 'observation', authoredAt: MERGER, citations: [], parsed: {} })
		.run();
	const stored = saveFile(`skymaps/${eventId}`, `${skymapId}.fits`, bytes);
	db.insert(table.skymap).values({ id: skymapId, eventId, noticeId, filePath: stored.path, bytes: stored.bytes, sha256: stored.sha256 }).run();
	db.update(table.gwEvent).set({ latestSkymapId: skymapId, latestNoticeId: noticeId }).where(eq(table.gwEvent.id, eventId)).run();
	return skymapId;
}

/** Ranked galaxies for an event (a catalogue of their own, rows in rank order). */
export function giveGalaxies(eventId: string, skymapId: string, galaxies: { name: string; raDeg: number; decDeg: number; distanceMpc: number; distanceErrMpc?: number }[]): number[] {
	const catalogId = `cat-${++n}`;
	db.insert(table.catalog).values({ id: catalogId, name: 'Test galaxies (invented)', synthetic: true, columns: {}, state: 'ready' }).run();
	const ids = galaxies.map(
		(g, k) =>
			db
				.insert(table.galaxy)
				.values({ catalogId, row: k, name: g.name, raDeg: g.raDeg, decDeg: g.decDeg, distanceMpc: g.distanceMpc, distanceErrMpc: g.distanceErrMpc ?? 0, weight: 1, pixel: 0 })
				.returning({ id: table.galaxy.id })
				.get().id
	);
	db.delete(table.eventGalaxy).where(eq(table.eventGalaxy.eventId, eventId)).run();
	ids.forEach((galaxyId, k) =>
		db.insert(table.eventGalaxy).values({ eventId, skymapId, rank: k + 1, galaxyId, score: 1 / (k + 1), probability: 0.1, cumulative: 0.1 * (k + 1) }).run()
	);
	db.insert(table.eventTargetsMeta)
		.values({ eventId, skymapId, catalogId, level: 0.9, fieldCounts: {}, computedAt: new Date(Date.now() + ++n) })
		.onConflictDoUpdate({ target: table.eventTargetsMeta.eventId, set: { skymapId, catalogId, computedAt: new Date(Date.now() + ++n) } })
		.run();
	return ids;
}

/**
 * The world. The candidate lies at the first direction of tests/fixtures/candidates/vetting.json
 * (near the map's peak) and its discovery is the first g detection of the kilonova-like fixture light
 * curve moved from 40 to 160 Mpc (+3.01 mag), so that the stored photometry repeats it.
 */
export function world(o: { withMap?: boolean; state?: table.GwEvent['state'] } = {}): World {
	const teamId = `team-${++n}`;
	db.insert(table.team).values({ id: teamId, name: `Basalt Ridge ${n} (test)`, region: 'Test' }).run();
	const telescopeId = `tel-${++n}`;
	db.insert(table.telescope)
		.values({
			id: telescopeId,
			teamId,
			name: `Basalt 0.6 m ${n} (test)`,
			siteName: 'Test site',
			latitudeDeg: -30,
			longitudeDeg: -70,
			elevationM: 2000,
			apertureM: 0.6,
			fovShape: 'circle',
			fovWidthDeg: 1,
			fovHeightDeg: 1,
			filters: ['g', 'r', 'i'],
			limitingMag: 21,
			limitingMagExposureS: 60,
			robotic: true
		})
		.run();
	const eventId = `ev-${++n}`;
	const sourceEventId = `S-work-${n}`;
	db.insert(table.gwEvent).values({ id: eventId, sourceEventId, role: 'observation', state: 'active', eventTime: MERGER }).run();
	const skymapId = o.withMap === false ? '' : giveMap(eventId, new Uint8Array(fixture('sky/moc_map.fits')));
	const observer = person('Olga Observer', ['observer'], [teamId]);
	const spectroA = person('Priya Spectro', ['spectroscopist']);
	const spectroB = person('Sten Spectro', ['spectroscopist']);
	const coordinator = person('Cora Coordinator', ['coordinator']);
	const duty = person('Dmitri Duty', ['duty']);
	const viewer = person('Vera Viewer', ['viewer']);
	addShift(SYSTEM, { userId: duty.id, startsAt: new Date(MERGER.getTime() - 86_400_000), endsAt: new Date(NOW.getTime() + 30 * 86_400_000), rank: 0 });
	const candidateName = `AT-work-${n}`;
	const { candidate } = reportCandidate(
		{ user: observer },
		{ eventId, name: candidateName, raDeg: 150.2, decDeg: -29.9, discoveredAt: '2026-12-02T13:52:05Z', magnitude: 18.0325 + 3.01, magnitudeErr: 0.0727, filter: 'g', telescopeId },
		new Date('2026-12-02T14:00:00Z')
	);
	if (o.state) db.update(table.gwEvent).set({ state: o.state }).where(eq(table.gwEvent.id, eventId)).run();
	return { teamId, telescopeId, eventId, sourceEventId, skymapId, candidateId: candidate.id, candidateName, observer, spectroA, spectroB, coordinator, duty, viewer };
}

/** The kilonova-like fixture light curve as CSV, moved from 40 to 160 Mpc (+3.01 mag). */
export function kilonovaCsv(): string {
	const lines = fixture('candidates/lightcurve-kilonova-like.csv').toString('utf8').trim().split('\n');
	const shift = (v: string) => (v === '' ? '' : (Number(v) + 3.01).toFixed(4));
	return [
		lines[0],
		...lines.slice(1).map((l) => {
			const [time, filter, mag, magErr, limit] = l.split(',');
			return [time, filter, shift(mag), magErr, shift(limit)].join(',');
		})
	].join('\n');
}
