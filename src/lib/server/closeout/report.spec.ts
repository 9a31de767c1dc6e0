import { readFileSync } from 'node:fs';
import { afterAll, beforeEach, describe, expect, it } from 'vitest';
import { eq, sql } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { receivedMail, stopFakeSmtp } from '../platform/fake-smtp';
import { clearSkyMapCache } from '../alerts/skymap-cache';
import { classifyCandidate } from '../candidates/classifications';
import { classificationMailIdle } from '../candidates/classifications';
import { clearVettingCache, vettingIdle } from '../candidates/vetting';
import { giveGalaxies, world, type World } from '../candidates/testing';
import { eventReport, saveRecordNote, recordNote, recordSky, EventNotFound } from './report';
import { reportPdf } from './report-pdf';
import { installReportMail, sendReportToList } from './report-mail';
import { closeEvent, reopenEvent } from './close';
import { mailingList, setMailingList } from './mailing-list';
import { InputError } from '../platform/errors';

/**
 * A seeded scenario in the database: the pointings, notices, acknowledgement and galaxies of
 * tests/fixtures/closeout/report_reference.json (healpy and astropy numbers, see
 * make_report_reference.py), stored as rows; the report is gathered from them and checked against
 * the reference and against counts taken straight from the tables.
 */
const ref = JSON.parse(readFileSync('tests/fixtures/closeout/report_reference.json', 'utf8'));
const MERGER_MS = Date.parse(ref.merger);

let w: World;
let n = 0;

function seed(): void {
	w = world();
	// The fixture's merger time, not the candidate world's.
	db.update(table.gwEvent).set({ eventTime: new Date(MERGER_MS) }).where(eq(table.gwEvent.id, w.eventId)).run();
	db.update(table.skymap)
		.set({ summary: { area50: 40, area90: 160, area99: 400, distanceMean: ref.distanceMpc[0], distanceStd: ref.distanceMpc[1], pixels: 1, maxOrder: 8, probabilitySum: 1, peak: { ra: 150, dec: -30 }, ordering: 'NUNIQ', warnings: [] } })
		.where(eq(table.skymap.id, w.skymapId))
		.run();
	// Notices with their inbox rows (received times); the world's own notice is authored at its merger and has none.
	for (const nt of ref.notices as { kind: 'preliminary' | 'initial'; authoredAt: string; receivedAt: string }[]) {
		const inbox = db
			.insert(table.noticeInbox)
			.values({ ivorn: `ivo://test.invalid/report#${++n}`, rawXml: '<x/>', via: 'vtp', receivedAt: new Date(nt.receivedAt), processedAt: new Date(nt.receivedAt) })
			.returning({ id: table.noticeInbox.id })
			.get().id;
		const noticeId = `nt-${++n}`;
		db.insert(table.notice)
			.values({ id: noticeId, eventId: w.eventId, inboxId: inbox, ivorn: `ivo://test.invalid/report-notice#${n}`, kind: nt.kind, role: 'observation', authoredAt: new Date(nt.authoredAt), citations: [], parsed: {} })
			.run();
		db.insert(table.dutyPage).values({ id: `pg-${++n}`, eventId: w.eventId, noticeId, userId: w.duty.id, sentAt: new Date(nt.receivedAt), acknowledgedAt: new Date(ref.acknowledged), acknowledgedBy: w.duty.id }).run();
	}
	// One team and telescope per fixture team and footprint (a telescope has one field of view).
	const teams = new Map<string, string>();
	for (const p of ref.pointings) {
		if (!teams.has(p.team)) {
			const id = `team-${p.team}-${++n}`;
			db.insert(table.team).values({ id, name: p.team, region: 'Test' }).run();
			teams.set(p.team, id);
		}
		const telescopeId = `tel-${p.id}-${++n}`;
		db.insert(table.telescope)
			.values({
				id: telescopeId,
				teamId: teams.get(p.team)!,
				name: `${p.team} scope ${p.id}`,
				siteName: 'Test site',
				latitudeDeg: -30,
				longitudeDeg: -70,
				elevationM: 2000,
				apertureM: 1,
				fovShape: p.shape,
				fovWidthDeg: p.shape === 'rectangle' ? p.widthDeg : p.diameterDeg,
				fovHeightDeg: p.shape === 'rectangle' ? p.heightDeg : p.diameterDeg,
				filters: ['g', 'r', 'i'],
				limitingMag: 21,
				limitingMagExposureS: 60,
				robotic: false
			})
			.run();
		db.insert(table.observation)
			.values({
				id: `obs-${p.id}-${++n}`,
				eventId: w.eventId,
				telescopeId,
				teamId: teams.get(p.team)!,
				reportedByUserId: w.observer.id,
				observedAt: new Date(MERGER_MS + p.minutesAfterMerger * 60_000),
				raDeg: p.raDeg,
				decDeg: p.decDeg,
				filter: p.filter,
				exposureS: p.exposureS,
				limitingMag: p.limitingMag,
				source: 'form'
			})
			.run();
	}
	const ids = giveGalaxies(
		w.eventId,
		w.skymapId,
		ref.galaxies.map((g: { id: string; raDeg: number; decDeg: number }) => ({ name: g.id, raDeg: g.raDeg, decDeg: g.decDeg, distanceMpc: 140 }))
	);
	ids.forEach((galaxyId, k) =>
		db.update(table.eventGalaxy).set({ probability: ref.galaxies[k].probability }).where(eq(table.eventGalaxy.galaxyId, galaxyId)).run()
	);
	db.update(table.eventTargetsMeta).set({ candidates: 1200 }).where(eq(table.eventTargetsMeta.eventId, w.eventId)).run();
}

beforeEach(() => {
	createTestDatabase();
	clearSkyMapCache();
	clearVettingCache();
	seed();
});

afterAll(async () => {
	await vettingIdle();
	await classificationMailIdle();
	await stopFakeSmtp();
});

describe('the event report gathered from the rows', () => {
	it('covers what healpy finds on the same map and footprints, per team too', async () => {
		expect.assertions(4 + 2 * 3);
		const r = await eventReport(w.eventId, new Date('2026-03-05T00:00:00Z'));
		const bound = r.coverage.errorBound!;
		// The stated worst case holds, and the actual difference is far smaller (miscounts along an edge cancel).
		expect(Math.abs(r.coverage.sky! - ref.expected.sky)).toBeLessThan(2e-3);
		expect(Math.abs(r.coverage.sky! - ref.expected.sky)).toBeLessThanOrEqual(bound);
		// Not the plain sum (the fixture's footprints overlap by ~16% of the probability).
		expect(Math.abs(r.coverage.sky! - ref.expected.sumOfFootprints)).toBeGreaterThan(0.1);
		expect(r.coverage.galaxies).toBeCloseTo(ref.expected.galaxies, 12);
		for (const t of r.coverage.byTeam) {
			expect(Math.abs(t.sky! - ref.expected.byTeam[t.team].sky)).toBeLessThan(2e-3);
			expect(t.galaxies).toBeCloseTo(ref.expected.byTeam[t.team].galaxies, 12);
		}
	});

	it('takes its times and counts from the stored rows', async () => {
		expect.assertions(8);
		classifyCandidate(w.spectroA, w.candidateId, { label: 'kilonova', confidence: 'medium' }, new Date('2026-03-02T00:00:00Z'));
		const r = await eventReport(w.eventId, new Date('2026-03-05T00:00:00Z'));
		const count = (t: typeof table.notice | typeof table.observation | typeof table.candidate, col: typeof table.notice.eventId | typeof table.observation.eventId | typeof table.candidate.eventId) =>
			db.select({ n: sql<number>`count(*)` }).from(t).where(eq(col, w.eventId)).get()!.n;
		expect(r.counts).toEqual({
			notices: count(table.notice, table.notice.eventId),
			observations: count(table.observation, table.observation.eventId),
			candidates: count(table.candidate, table.candidate.eventId),
			classifications: 1
		});
		expect(r.counts.notices).toBe(3);
		expect(r.times.merger).toBe(new Date(MERGER_MS).toISOString());
		expect(r.times.firstNoticeReceived).toBe(new Date(ref.notices[0].receivedAt).toISOString());
		expect(r.delaysS.acknowledged).toBeCloseTo(ref.expected.delaysS.acknowledged, 6);
		expect(r.delaysS.firstObservation).toBeCloseTo(ref.expected.delaysS.firstObservation, 6);
		expect(r.candidates[0].classification.label).toBe('kilonova');
		expect(r.participants.people.find((p) => p.name === w.duty.name)?.deeds).toEqual(['acknowledged']);
	});

	it('refuses an unknown event', async () => {
		expect.assertions(1);
		await expect(eventReport('no-such-event')).rejects.toThrow(EventNotFound);
	});
});

describe('the coordinator’s note', () => {
	it('is saved, replaced, shown in the report and removed when blank', async () => {
		expect.assertions(5);
		saveRecordNote(w.coordinator, w.eventId, '  First draft.  ');
		saveRecordNote(w.coordinator, w.eventId, 'Clouds at two sites on the second night.');
		expect(recordNote(w.eventId)?.text).toBe('Clouds at two sites on the second night.');
		expect(recordNote(w.eventId)?.updatedBy).toBe(w.coordinator.name);
		expect((await eventReport(w.eventId)).annotation?.text).toBe('Clouds at two sites on the second night.');
		saveRecordNote(w.coordinator, w.eventId, '   ');
		expect(recordNote(w.eventId)).toBeNull();
		expect(() => saveRecordNote(w.coordinator, w.eventId, 'x'.repeat(5000))).toThrow(InputError);
	});
});

/** Pages of a PDF: its page objects (not the page tree's /Pages node). */
const pageCount = (pdf: Buffer) => (pdf.toString('latin1').match(/\/Type\s*\/Page(?!s)/g) ?? []).length;

describe('the PDF and the mail to the list', () => {
	it('makes a PDF with the curve and the sky drawn', async () => {
		expect.assertions(5);
		saveRecordNote(w.coordinator, w.eventId, 'Clouds at two sites.');
		const pdf = await reportPdf(await eventReport(w.eventId), recordSky(w.eventId));
		expect(pdf.subarray(0, 5).toString('latin1')).toBe('%PDF-');
		const pages = pageCount(pdf);
		expect(pages).toBeGreaterThanOrEqual(2);
		// The page tree agrees with the page objects.
		expect(pdf.toString('latin1')).toMatch(new RegExp(`/Type /Pages\\s*/Count ${pages}`));
		expect(pdf.length).toBeGreaterThan(10_000);
		// The app's families are embedded (subset), not a stand-in.
		expect(['Inter-Regular', 'Inter-Bold', 'SpaceGrotesk-SemiBold', 'JetBrainsMono-Regular'].filter((f) => pdf.includes(f))).toHaveLength(4);
	});

	it('sends nothing without an address, and the Markdown and PDF as attachments with one', async () => {
		expect.assertions(7);
		expect(await sendReportToList(w.eventId)).toEqual({ sent: false, reason: 'no-address' });
		const to = `list-${process.pid}-${Date.now()}@report.test`;
		setMailingList(w.coordinator, to);
		expect(mailingList().address).toBe(to);
		const outcome = await sendReportToList(w.eventId);
		expect(outcome.sent).toBe(true);
		const mail = await waitForMail(to);
		expect(mail.subject).toContain(w.sourceEventId);
		const md = mail.attachments.find((a) => a.filename.endsWith('.md'))!;
		const pdf = mail.attachments.find((a) => a.filename.endsWith('.pdf'))!;
		expect(md.content.toString('utf8')).toContain(`**${((await eventReport(w.eventId)).coverage.sky! * 100).toFixed(1)}%**`);
		expect(pdf.content.subarray(0, 5).toString('latin1')).toBe('%PDF-');
		expect(pdf.contentType).toBe('application/pdf');
	});

	it('is sent once when a coordinator closes the event', async () => {
		expect.assertions(2);
		const to = `list-closed-${process.pid}-${Date.now()}@report.test`;
		setMailingList(w.coordinator, to);
		const stop = installReportMail();
		try {
			// closeEvent logs to the board and the event's room; the list must get one mail, not two.
			closeEvent(w.coordinator, w.eventId, { reason: 'search-complete' });
			const mail = await waitForMail(to);
			expect(mail.attachments.map((a) => a.filename).sort()).toEqual([`${w.sourceEventId}-record.md`, `${w.sourceEventId}-record.pdf`]);
			await new Promise((r) => setTimeout(r, 1500));
			expect(receivedMail().filter((m) => m.to.includes(to))).toHaveLength(1);
		} finally {
			stop();
			reopenEvent(w.coordinator, w.eventId);
		}
	});
});

async function waitForMail(to: string, timeoutMs = 10_000) {
	const until = Date.now() + timeoutMs;
	while (Date.now() < until) {
		const got = receivedMail().find((m) => m.to.includes(to));
		if (got) return got;
		await new Promise((r) => setTimeout(r, 25));
	}
	throw new Error(`no mail to ${to}`);
}

