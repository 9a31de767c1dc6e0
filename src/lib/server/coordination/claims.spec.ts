import { afterAll, afterEach, beforeEach, describe, expect, it } from 'vitest';
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { and, eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { loadSessionUser, validateApiToken, type SessionUser } from '../people/auth';
import { issueToken } from '../people/tokens';
import { onRecorded, SYSTEM, type LiveMessage } from '../platform/realtime';
import { receivedMail, stopFakeSmtp } from '../platform/fake-smtp';
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { commitNotice, processInbox } from '../alerts/ingest';
import * as claims from './claims';
import { sunPosition, sunSeparationDeg } from '../../targeting/sun-moon.ts';

const MIN = 60_000;
let n = 0;
let heard: LiveMessage[] = [];
let off: (() => void) | null = null;

beforeEach(() => {
	createTestDatabase();
	heard = [];
	off = onRecorded((m) => heard.push(m));
});
afterEach(() => off?.());
afterAll(() => stopFakeSmtp());

function team(name: string) {
	const id = `team-${++n}`;
	db.insert(table.team).values({ id, name, region: 'Test' }).run();
	return id;
}

function telescope(teamId: string, name: string, o: Partial<table.NewTelescope> = {}) {
	const id = `tel-${++n}`;
	db.insert(table.telescope)
		.values({
			id,
			teamId,
			name,
			siteName: 'Test site',
			latitudeDeg: -30,
			longitudeDeg: -70,
			elevationM: 2000,
			apertureM: 1,
			fovShape: 'rectangle',
			fovWidthDeg: 0.5,
			fovHeightDeg: 0.5,
			filters: ['g', 'r', 'i'],
			limitingMag: 21,
			limitingMagExposureS: 60,
			...o
		})
		.run();
	return id;
}

/** A person without a password hash worth checking: these tests never sign in. */
function person(name: string, roles: table.Role[], teamIds: string[] = []): SessionUser {
	const id = `user-${++n}`;
	db.insert(table.user).values({ id, email: `${id}@claims.test`, name, passwordHash: 'unused' }).run();
	for (const role of roles) db.insert(table.userRole).values({ userId: id, role }).run();
	for (const teamId of teamIds) db.insert(table.teamMember).values({ teamId, userId: id }).run();
	return loadSessionUser(id)!;
}

function event(state: table.GwEvent['state'] = 'active') {
	const id = `ev-${++n}`;
	db.insert(table.gwEvent).values({ id, sourceEventId: `S-claims-${n}`, role: 'observation', state, eventTime: new Date('2026-12-01T00:00:00Z') }).run();
	return id;
}

function galaxyAt(raDeg: number, decDeg: number) {
	const catalogId = `cat-${++n}`;
	db.insert(table.catalog).values({ id: catalogId, name: `Test catalogue ${n}`, synthetic: true, columns: {}, state: 'ready' }).run();
	return db
		.insert(table.galaxy)
		.values({ catalogId, row: 0, name: `TG ${n}`, raDeg, decDeg, distanceMpc: 100, distanceErrMpc: 10, weight: 1, pixel: 0 })
		.returning()
		.get().id;
}

function antiSunRaDeg(now = new Date()): number {
	return (sunPosition({ latitudeDeg: 0, longitudeDeg: 0, elevationM: 0 }, now).raDeg + 180) % 360;
}

function setup() {
	const north = team('North Ridge (test)');
	const south = team('South Vale (test)');
	const tn = telescope(north, 'Ridge 1m (test)');
	const ts = telescope(south, 'Vale 0.6m (test)');
	const eventId = event();
	// Opposite the Sun now: claims inside a telescope's Sun limit are refused (tested below).
	const galaxyId = String(galaxyAt(antiSunRaDeg(), -20));
	return { north, south, tn, ts, eventId, galaxyId };
}

describe('claim', () => {
	it('refuses a target inside the telescope’s own Sun-avoidance limit, naming the elongation, and reassigning into it too', () => {
		const s = setup();
		const now = new Date('2026-12-02T04:00:00Z');
		const sun = sunPosition({ latitudeDeg: 0, longitudeDeg: 0, elevationM: 0 }, now);
		// 30° east of the Sun along its declination circle (well inside 45°), and a strict telescope for the reassign case.
		const near = String(galaxyAt((sun.raDeg + 30 / Math.cos((sun.decDeg * Math.PI) / 180)) % 360, sun.decDeg));
		const elongation = sunSeparationDeg(db.select().from(table.galaxy).where(eq(table.galaxy.id, Number(near))).get()!, now);
		expect(elongation).toBeGreaterThan(25);
		expect(elongation).toBeLessThan(35);
		const a = person('Ann', ['observer'], [s.north]);
		let err: unknown;
		try {
			claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: near, telescopeId: s.tn }, now);
		} catch (e) {
			err = e;
		}
		expect(err).toBeInstanceOf(claims.ClaimError);
		expect((err as claims.ClaimError).status).toBe(422);
		expect((err as claims.ClaimError).code).toBe('sun_avoidance');
		expect((err as Error).message).toContain(`is ${elongation.toFixed(1)}° from the Sun, inside Ridge 1m (test)'s 45° Sun-avoidance limit`);
		expect(db.select().from(table.claim).all()).toHaveLength(0);
		expect(heard.filter((m) => m.type === 'claim.claimed')).toHaveLength(0);
		// A telescope whose own limit is 20° may claim it.
		const lax = telescope(s.north, 'Ridge twilight (test)', { minSunSeparationDeg: 20 });
		const ok = claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: near, telescopeId: lax }, now);
		expect(ok.state).toBe('claimed');
		// A coordinator cannot move it onto the 45° telescope.
		const coordinator = person('Cora', ['coordinator']);
		expect(() => claims.reassign(coordinator, ok.id, s.tn, now)).toThrow(/Sun-avoidance limit/);
		expect(claims.getClaim(ok.id)!.telescopeId).toBe(lax);
	});

	it('gives a target to the first team and names the holder to the second', () => {
		const s = setup();
		const a = person('Ann Observer', ['observer'], [s.north]);
		const b = person('Ben Observer', ['observer'], [s.south]);
		const c = claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn });
		expect(c.state).toBe('claimed');
		let err: unknown;
		try {
			claims.claim(b, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.ts });
		} catch (e) {
			err = e;
		}
		expect(err).toBeInstanceOf(claims.ClaimTaken);
		expect((err as claims.ClaimTaken).status).toBe(409);
		expect((err as Error).message).toMatch(/^Already taken by North Ridge \(test\) \(Ridge 1m \(test\)\)/);
		// The target is named as the targets table names it (the galaxy's name), not by its row id.
		expect((err as Error).message).toMatch(/: TG \d+\.$/);
		expect((err as Error).message).not.toContain(`galaxy ${s.galaxyId}`);
		expect(heard.filter((m) => m.type === 'claim.claimed')).toHaveLength(1);
		expect(heard[0].room).toBe(`event:${s.eventId}`);
	});

	it('keeps different filters and epochs apart, and frees a target once released', () => {
		const s = setup();
		const a = person('Ann', ['observer'], [s.north]);
		const b = person('Ben', ['observer'], [s.south]);
		const base = { eventId: s.eventId, targetKind: 'galaxy' as const, targetId: s.galaxyId };
		const first = claims.claim(a, { ...base, telescopeId: s.tn, filter: 'g' });
		claims.claim(b, { ...base, telescopeId: s.ts, filter: 'r' });
		claims.claim(b, { ...base, telescopeId: s.ts, filter: 'g', epoch: 2 });
		expect(() => claims.claim(b, { ...base, telescopeId: s.ts, filter: 'g' })).toThrow(claims.ClaimTaken);
		claims.release(a, first.id, 'clouds');
		const again = claims.claim(b, { ...base, telescopeId: s.ts, filter: 'g' });
		expect(again.teamId).toBe(s.south);
		expect(db.select().from(table.claim).all()).toHaveLength(4);
	});

	it('is enforced by the partial unique index itself, not only by the module', () => {
		const s = setup();
		const row = { eventId: s.eventId, targetKind: 'field' as const, targetId: 'F-1', filter: '', epoch: 1, telescopeId: s.tn, teamId: s.north, claimedAt: new Date() };
		db.insert(table.claim).values({ id: 'c1', ...row, state: 'observing' }).run();
		expect(() => db.insert(table.claim).values({ id: 'c2', ...row, state: 'claimed' }).run()).toThrow(/UNIQUE/);
		// Closed states do not hold the target: any number may coexist.
		db.insert(table.claim).values({ id: 'c3', ...row, state: 'done' }).run();
		db.insert(table.claim).values({ id: 'c4', ...row, state: 'lapsed' }).run();
		expect(db.select().from(table.claim).all()).toHaveLength(3);
	});

	it('refuses other teams’ telescopes, unknown galaxies, retracted events and unknown filters', () => {
		const s = setup();
		const a = person('Ann', ['observer'], [s.north]);
		const base = { eventId: s.eventId, targetKind: 'galaxy' as const, targetId: s.galaxyId };
		expect(() => claims.claim(a, { ...base, telescopeId: s.ts })).toThrow(/not a member/);
		expect(() => claims.claim(a, { ...base, targetId: '999999', telescopeId: s.tn })).toThrow(/No galaxy 999999/);
		expect(() => claims.claim(a, { ...base, telescopeId: s.tn, filter: 'R' })).toThrow(/case-sensitive/);
		const retracted = event('retracted');
		expect(() => claims.claim(a, { ...base, eventId: retracted, telescopeId: s.tn })).toThrow(/retracted/);
		expect(() => claims.claim(a, { ...base, targetKind: 'field', targetId: 'NOPE', telescopeId: s.tn })).toThrow(/not among/);
		expect(db.select().from(table.claim).all()).toHaveLength(0);
		// A coordinator may claim with any team's telescope.
		const coord = person('Cora Coordinator', ['coordinator']);
		expect(claims.claim(coord, { ...base, telescopeId: s.ts }).teamId).toBe(s.south);
	});
});

describe('state transitions', () => {
	it('goes claimed → observing → done and refuses moves out of order', () => {
		const s = setup();
		const a = person('Ann', ['observer'], [s.north]);
		const c = claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn });
		expect(claims.start(a, c.id).state).toBe('observing');
		expect(() => claims.start(a, c.id)).toThrow(/observing; it cannot become observing/);
		const done = claims.complete(a, c.id);
		expect(done.state).toBe('done');
		expect(done.doneAt).toBeInstanceOf(Date);
		expect(() => claims.release(a, c.id)).toThrow(/done/);
		expect(heard.map((m) => m.type)).toEqual(['claim.claimed', 'claim.observing', 'claim.done']);
	});

	it('lets only the holder’s team or a coordinator change a claim, and only a coordinator reassign', () => {
		const s = setup();
		const a = person('Ann', ['observer'], [s.north]);
		const b = person('Ben', ['observer'], [s.south]);
		const coord = person('Cora', ['coordinator']);
		const c = claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn });
		expect(() => claims.release(b, c.id)).toThrow(/claiming team or a coordinator/);
		expect(() => claims.reassign(a, c.id, s.ts)).toThrow(/Only a coordinator/);
		const moved = claims.reassign(coord, c.id, s.ts);
		expect(moved.teamId).toBe(s.south);
		expect(moved.telescopeId).toBe(s.ts);
		expect(moved.state).toBe('claimed');
		// Now Ben's team holds it.
		expect(claims.start(b, c.id).state).toBe('observing');
		const log = db.select().from(table.eventLog).where(eq(table.eventLog.action, 'claim.reassigned')).get();
		expect(log?.payload).toMatchObject({ claimId: c.id, fromTeamId: s.north, teamId: s.south });
	});
});

describe('lapse', () => {
	it('frees claims not started within the coordinator’s lapse time and mails the team', async () => {
		const s = setup();
		const a = person('Ann', ['observer'], [s.north]);
		const coord = person('Cora', ['coordinator']);
		claims.setLapseMinutes(coord, s.eventId, 30);
		const t0 = new Date('2026-12-02T01:00:00Z');
		const stale = claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn, filter: 'g' }, t0);
		const started = claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn, filter: 'r' }, t0);
		claims.start(a, started.id, new Date(t0.getTime() + 5 * MIN));
		expect(await claims.lapseOverdue(new Date(t0.getTime() + 29 * MIN))).toHaveLength(0);
		const lapsed = await claims.lapseOverdue(new Date(t0.getTime() + 31 * MIN));
		expect(lapsed.map((c) => c.id)).toEqual([stale.id]);
		expect(claims.getClaim(stale.id)?.state).toBe('lapsed');
		expect(claims.getClaim(started.id)?.state).toBe('observing');
		expect(heard.filter((m) => m.type === 'claim.lapsed')).toHaveLength(1);
		const mail = receivedMail().filter((m) => m.to.includes(a.email));
		expect(mail).toHaveLength(1);
		expect(mail[0].subject).toContain(`galaxy ${s.galaxyId}`);
		expect(mail[0].text).toContain('not started within 30 minutes');
		// The freed target can be claimed again.
		expect(claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn, filter: 'g' }).state).toBe('claimed');
	});

	it('uses the global setting, else 60 minutes', () => {
		const s = setup();
		const coord = person('Cora', ['coordinator']);
		expect(claims.lapseMinutesFor(s.eventId)).toBe(60);
		claims.setLapseMinutes(coord, 'global', 45);
		expect(claims.lapseMinutesFor(s.eventId)).toBe(45);
		claims.setLapseMinutes(coord, s.eventId, 15);
		expect(claims.lapseMinutesFor(s.eventId)).toBe(15);
		expect(() => claims.setLapseMinutes(person('Ann', ['observer']), 'global', 5)).toThrow(/coordinator/);
	});

	it('takes lapse times of whole minutes from 5 to 1440 only, the range the page states', () => {
		const coord = person('Cora', ['coordinator']);
		for (const bad of [4, 1441, 30.5, Number.NaN]) expect(() => claims.setLapseMinutes(coord, 'global', bad)).toThrow(/from 5 to 1440/);
		claims.setLapseMinutes(coord, 'global', 1440);
		expect(claims.lapseMinutesFor('no-such-event')).toBe(1440);
	});
});

describe('retraction', () => {
	it('releases open claims with the reason', () => {
		const s = setup();
		const a = person('Ann', ['observer'], [s.north]);
		const open1 = claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn, filter: 'g' });
		const open2 = claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn, filter: 'r' });
		claims.start(a, open2.id);
		const finished = claims.claim(a, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn, filter: 'i' });
		claims.complete(a, finished.id);
		expect(claims.cancelOpenClaims(s.eventId)).toBe(2);
		for (const id of [open1.id, open2.id]) {
			const c = claims.getClaim(id)!;
			expect(c.state).toBe('released');
			expect(c.note).toBe('event retracted');
		}
		expect(claims.getClaim(finished.id)?.state).toBe('done');
		const released = heard.filter((m) => m.type === 'claim.released');
		expect(released.map((m) => m.payload.reason)).toEqual(['event retracted', 'event retracted']);
	});
});

describe('retraction notices to teams', () => {
	let uninstall: (() => void) | null = null;
	afterEach(() => uninstall?.());

	async function mailFor(email: string, atLeast: number, waitMs = 3000) {
		const until = Date.now() + waitMs;
		let got = receivedMail().filter((m) => m.to.includes(email));
		while (Date.now() < until && got.length < atLeast) {
			await new Promise((r) => setTimeout(r, 20));
			got = receivedMail().filter((m) => m.to.includes(email));
		}
		return got;
	}

	it('e-mails each member of every team whose claims the retraction freed, with the stated reason, and nobody else', async () => {
		uninstall = claims.installClaims({ everyMs: null });
		const s = setup();
		const third = team('Quiet Hollow (test)');
		const ann = person('Ann', ['observer'], [s.north]);
		const ned = person('Ned', ['observer'], [s.north, s.south]);
		const sue = person('Sue', ['observer'], [s.south]);
		const gone = person('Gone', ['observer'], [s.south]);
		db.update(table.user).set({ disabledAt: new Date() }).where(eq(table.user.id, gone.id)).run();
		const quiet = person('Quinn', ['observer'], [third]);
		const northClaim = claims.claim(ann, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn, filter: 'g' });
		const southClaim = claims.claim(sue, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.ts, filter: 'r' });
		claims.start(sue, southClaim.id);

		const source = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, s.eventId)).get()!.sourceEventId;
		const xml = readFileSync(fileURLToPath(new URL('../../../../tests/fixtures/notices/retraction.xml', import.meta.url)), 'utf8').replaceAll('SX30041315', source);
		const r = await processInbox(commitNotice(xml, 'api').inboxId);
		expect(r.outcome).toBe('event-retracted');
		expect(claims.getClaim(northClaim.id)?.state).toBe('released');
		const retracted = heard.find((m) => m.type === 'event.retracted' && m.room === 'board')!;
		expect(retracted.payload).toMatchObject({ reason: 'Retracted: instrumental artefact.' });
		const freed = heard.filter((m) => m.type === 'claim.released' && (m.payload as { reason: string }).reason === 'event retracted');
		expect(freed.map((m) => (m.payload as { claimId: string }).claimId).sort()).toEqual([northClaim.id, southClaim.id].sort());

		const toAnn = await mailFor(ann.email, 1);
		expect(toAnn).toHaveLength(1);
		expect(toAnn[0].subject).toBe(`RETRACTED ${source} · your claims were released`);
		expect(toAnn[0].text).toContain('"Retracted: instrumental artefact."');
		expect(toAnn[0].text).toContain(`galaxy ${s.galaxyId} in g`);
		expect(toAnn[0].text).not.toContain(`galaxy ${s.galaxyId} in r`);
		// A member of both teams hears once, about both claims.
		const toNed = await mailFor(ned.email, 1);
		expect(toNed).toHaveLength(1);
		expect(toNed[0].text).toContain(`galaxy ${s.galaxyId} in g`);
		expect(toNed[0].text).toContain(`galaxy ${s.galaxyId} in r`);
		expect(await mailFor(sue.email, 1)).toHaveLength(1);
		// A disabled account and a team without claims get nothing.
		expect(await mailFor(gone.email, 1, 300)).toEqual([]);
		expect(await mailFor(quiet.email, 1, 300)).toEqual([]);
	});

	it('says so when the retraction gives no reason, and sends nothing when no claim was open', async () => {
		expect(await claims.tellRetractedClaims(event(), [], null)).toEqual([]);
		const s = setup();
		const ann = person('Ann', ['observer'], [s.north]);
		const c = claims.claim(ann, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: s.tn });
		const freed = claims.releaseForRetraction(s.eventId);
		expect(freed.map((f) => f.id)).toEqual([c.id]);
		expect(await claims.tellRetractedClaims(s.eventId, [c.id], null)).toEqual([ann.email]);
		const got = await mailFor(ann.email, 1);
		expect(got[0].text).toContain('(no reason was given)');
	});
});

describe('100 simultaneous claims over HTTP', () => {
	it('gives exactly one 201, 99 × 409, one row and one live message', async () => {
		const s = setup();
		const tokens: string[] = [];
		for (let i = 0; i < 100; i++) {
			const teamId = i % 2 ? s.north : s.south;
			const u = person(`Observer ${i}`, ['observer'], [teamId]);
			tokens.push(issueToken(SYSTEM, { name: `t${i}`, userId: u.id }).secret);
		}
		const telescopeOfTeam = { [s.north]: s.tn, [s.south]: s.ts };
		heard = [];
		// The route's contract in miniature: bearer token → person → claim(), ClaimTaken → 409.
		const server = http.createServer((req, res) => {
			const principal = validateApiToken((req.headers.authorization ?? '').slice(7));
			const send = (status: number, body: unknown) => {
				res.writeHead(status, { 'content-type': 'application/json' });
				res.end(JSON.stringify(body));
			};
			if (!principal?.user) return send(401, { error: { code: 'unauthenticated', message: 'no' } });
			const user = principal.user;
			try {
				const c = claims.claim(user, { eventId: s.eventId, targetKind: 'galaxy', targetId: s.galaxyId, telescopeId: telescopeOfTeam[user.teamIds[0]] });
				send(201, { claim: c });
			} catch (e) {
				if (e instanceof claims.ClaimError) return send(e.status, { error: { code: e.code, message: e.message } });
				send(500, { error: { code: 'error', message: String(e) } });
			}
		});
		await new Promise<void>((r) => server.listen(0, '127.0.0.1', () => r()));
		const { port } = server.address() as AddressInfo;
		const agent = new http.Agent({ keepAlive: false, maxSockets: 200 });
		const post = (token: string) =>
			new Promise<{ status: number; body: { error?: { code: string; message: string } } }>((resolve, reject) => {
				const req = http.request({ host: '127.0.0.1', port, method: 'POST', path: '/', agent, headers: { authorization: `Bearer ${token}` } }, (res) => {
					let data = '';
					res.on('data', (d) => (data += d));
					res.on('end', () => resolve({ status: res.statusCode ?? 0, body: JSON.parse(data) }));
				});
				req.on('error', reject);
				req.end();
			});
		try {
			const answers = await Promise.all(tokens.map(post));
			const statuses = answers.map((a) => a.status);
			expect(statuses.filter((x) => x === 201)).toHaveLength(1);
			expect(statuses.filter((x) => x === 409)).toHaveLength(99);
			const winner = db.select().from(table.claim).all();
			expect(winner).toHaveLength(1);
			const winningTeam = db.select().from(table.team).where(eq(table.team.id, winner[0].teamId)).get()!;
			for (const a of answers.filter((x) => x.status === 409)) {
				expect(a.body.error?.code).toBe('taken');
				expect(a.body.error?.message).toContain(`Already taken by ${winningTeam.name}`);
			}
			expect(heard.filter((m) => m.type === 'claim.claimed')).toHaveLength(1);
			expect(db.select().from(table.eventLog).where(and(eq(table.eventLog.action, 'claim.claimed'))).all()).toHaveLength(1);
		} finally {
			agent.destroy();
			await new Promise<void>((r) => server.close(() => r()));
		}
	});
});
