import { mkdtempSync, readdirSync, rmSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { connect, db, useDatabase } from '../platform/db';
import * as table from '../platform/db/schema';
import { storagePath, useStorageRoot } from '../platform/storage';
import { receivedMail, stopFakeSmtp, type ReceivedMail } from '../platform/fake-smtp';
import { CandidateError } from './candidates';
import { CandidateTaken, currentTake, releaseCandidate, takeCandidate } from './takers';
import { MAX_SPECTRUM_BYTES, listSpectra, spectrumFile, spectrumPoints, uploadSpectrum } from './spectra';
import { classificationMailIdle, classifyCandidate } from './classifications';
import { decideCandidate } from './decisions';
import { addComment } from './discussion';
import { getCandidateDetail } from './detail';
import { addPhotometryCsv } from './photometry';
import { clearVettingCache, vettingIdle, vettingSummaries } from './vetting';
import { fixture, kilonovaCsv, NOW, world, type World } from './testing';

let storage: string;
let w: World;

beforeAll(() => {
	storage = mkdtempSync(join(tmpdir(), 'strainline-spectra-'));
	useStorageRoot(storage);
});
afterAll(async () => {
	await vettingIdle();
	await classificationMailIdle();
	useStorageRoot(null);
	rmSync(storage, { recursive: true, force: true });
	await stopFakeSmtp();
});
beforeEach(() => {
	createTestDatabase();
	clearVettingCache();
	w = world();
});

const logged = (action: string) => db.select().from(table.eventLog).where(eq(table.eventLog.action, action)).all();
const spectrumFiles = () => (existsSync(storagePath(`spectra/${w.candidateId}`)) ? readdirSync(storagePath(`spectra/${w.candidateId}`)) : []);

function thrown(f: () => unknown): CandidateError {
	try {
		f();
	} catch (e) {
		if (e instanceof CandidateError) return e;
		throw e;
	}
	throw new Error('expected a refusal');
}

async function thrownAsync(f: () => Promise<unknown>): Promise<CandidateError> {
	try {
		await f();
	} catch (e) {
		if (e instanceof CandidateError) return e;
		throw e;
	}
	throw new Error('expected a refusal');
}

async function mailTo(email: string, count: number, timeoutMs = 3000): Promise<ReceivedMail[]> {
	const until = Date.now() + timeoutMs;
	while (Date.now() < until) {
		const got = receivedMail().filter((m) => m.to.includes(email));
		if (got.length >= count) return got;
		await new Promise((r) => setTimeout(r, 20));
	}
	return receivedMail().filter((m) => m.to.includes(email));
}

describe('taking a candidate for a spectrum', () => {
	it('two people taking at once through two connections: the unique index lets one win, the other hears who', () => {
		expect.hasAssertions();
		const dir = mkdtempSync(join(tmpdir(), 'strainline-take-race-'));
		try {
			const file = join(dir, 'race.sqlite');
			const first = connect(file);
			useDatabase(first);
			const race = world();
			const second = connect(file);
			useDatabase(first);
			const won = takeCandidate(race.spectroA, race.candidateId, { note: 'FORS-like slit, tonight' }, NOW);
			// The other server process never saw the first take before inserting its own.
			useDatabase(second);
			const lost = thrown(() => takeCandidate(race.spectroB, race.candidateId, {}, NOW));
			expect(lost).toBeInstanceOf(CandidateTaken);
			expect(lost.status).toBe(409);
			expect(lost.code).toBe('taken');
			expect(lost.message).toBe(`Priya Spectro is already getting a spectrum of this candidate (since ${NOW.toISOString()}: FORS-like slit, tonight).`);
			expect((lost as CandidateTaken).holder.id).toBe(won.id);
			expect(db.select().from(table.spectrumTake).all()).toHaveLength(1);
			first.$client.close();
			second.$client.close();
		} finally {
			createTestDatabase();
			rmSync(dir, { recursive: true, force: true });
		}
	});
	it('only the holder or a coordinator releases; then someone else may take it', () => {
		expect.hasAssertions();
		takeCandidate(w.spectroA, w.candidateId, {}, NOW);
		expect(thrown(() => releaseCandidate(w.spectroB, w.candidateId, NOW)).status).toBe(403);
		expect(releaseCandidate(w.coordinator, w.candidateId, NOW).state).toBe('released');
		expect(thrown(() => releaseCandidate(w.spectroA, w.candidateId, NOW)).code).toBe('not_taken');
		expect(takeCandidate(w.spectroB, w.candidateId, {}, NOW).userName).toBe('Sten Spectro');
		expect(logged('candidate.taken')).toHaveLength(2);
		expect(logged('candidate.released')).toHaveLength(1);
		expect(thrown(() => takeCandidate(w.observer, w.candidateId, {}, NOW)).status).toBe(403);
	});
	it('a rejected candidate is not taken until it is reopened', () => {
		expect.hasAssertions();
		decideCandidate(w.observer, w.candidateId, { state: 'rejected', reason: 'asteroid', note: 'moved 3″ in 20 min' }, NOW);
		expect(thrown(() => takeCandidate(w.spectroA, w.candidateId, {}, NOW)).code).toBe('rejected');
		decideCandidate(w.duty, w.candidateId, { state: 'open', note: 'the motion was a bad subtraction' }, NOW);
		expect(takeCandidate(w.spectroA, w.candidateId, {}, NOW).state).toBe('taken');
	});
});

describe('uploading a spectrum', () => {
	it('reads the file before storing it, keeps it in the storage folder and ends the uploader’s take', async () => {
		expect.hasAssertions();
		takeCandidate(w.spectroA, w.candidateId, {}, NOW);
		const bytes = new Uint8Array(fixture('candidates/spectra/ascii-basic.txt'));
		const s = await uploadSpectrum(w.spectroA, w.candidateId, { bytes, fileName: 'at-work.txt', notes: 'blue continuum' }, NOW);
		expect(s).toMatchObject({ originalName: 'at-work.txt', format: 'ascii', bytes: bytes.length, notes: 'blue continuum', uploadedBy: 'Priya Spectro' });
		expect(s.summary.points).toBeGreaterThan(10);
		const file = spectrumFile(w.candidateId, s.id)!;
		expect(Buffer.compare(file.bytes, Buffer.from(bytes))).toBe(0);
		expect(spectrumFiles()).toEqual([`${s.id}.txt`]);
		expect(currentTake(w.candidateId)).toBeNull();
		expect(logged('candidate.spectrum')[0].payload).toMatchObject({ spectrumId: s.id, format: 'ascii', completedTakeId: expect.any(String) });
		const fits = await uploadSpectrum(w.spectroB, w.candidateId, { bytes: new Uint8Array(fixture('candidates/spectra/table.fits')), fileName: 'table.fits' }, new Date(NOW.getTime() + 1000));
		expect(fits.format).toBe('fits-table');
		expect(listSpectra(w.candidateId).map((x) => x.id)).toEqual([fits.id, s.id]);
	});
	const bad: [string, string, RegExp][] = [
		['text in a number column', 'bad-text-in-number.txt', /^bad-text-in-number\.txt cannot be read as a spectrum: .*line \d+/],
		['a single column', 'bad-one-column.txt', /^bad-one-column\.txt cannot be read as a spectrum: .*column/],
		['an empty file (comments only)', 'bad-comments-only.txt', /^bad-comments-only\.txt cannot be read as a spectrum: /],
		['a truncated FITS file', 'bad-truncated.fits', /^bad-truncated\.fits cannot be read as a spectrum: .*(truncated|ends)/],
		['0 bytes', 'bad-zero-bytes.txt', /^bad-zero-bytes\.txt cannot be read as a spectrum: the file is empty \(0 bytes\)\.$/]
	];
	for (const [what, name, message] of bad) {
		it(`refuses ${what} with the reason and stores nothing`, async () => {
			expect.hasAssertions();
			const e = await thrownAsync(() => uploadSpectrum(w.spectroA, w.candidateId, { bytes: new Uint8Array(fixture(`candidates/spectra/${name}`)), fileName: name }, NOW));
			expect(e.status).toBe(422);
			expect(e.code).toBe('invalid_spectrum');
			expect(e.message).toMatch(message);
			expect(db.select().from(table.candidateSpectrum).all()).toHaveLength(0);
			expect(spectrumFiles()).toEqual([]);
			expect(logged('candidate.spectrum')).toHaveLength(0);
		});
	}
	it('refuses a file over the size limit (413) and a retracted event (409), storing nothing', async () => {
		expect.hasAssertions();
		const big = await thrownAsync(() => uploadSpectrum(w.spectroA, w.candidateId, { bytes: new Uint8Array(MAX_SPECTRUM_BYTES + 1), fileName: 'big.txt' }, NOW));
		expect(big.status).toBe(413);
		expect(big.message).toBe('big.txt is 10.0 MB (10,485,761 bytes), over the limit of 10.0 MB (10,485,760 bytes) for a spectrum.');
		db.update(table.gwEvent).set({ state: 'retracted' }).where(eq(table.gwEvent.id, w.eventId)).run();
		const retracted = await thrownAsync(() => uploadSpectrum(w.spectroA, w.candidateId, { bytes: new Uint8Array(fixture('candidates/spectra/ascii-basic.txt')) }, NOW));
		expect(retracted.code).toBe('event_retracted');
		expect(thrown(() => takeCandidate(w.spectroA, w.candidateId, {}, NOW)).code).toBe('event_retracted');
		expect(thrown(() => classifyCandidate(w.spectroA, w.candidateId, { label: 'kilonova', confidence: 'high' }, NOW)).code).toBe('event_retracted');
		expect(thrown(() => decideCandidate(w.duty, w.candidateId, { state: 'promoted' }, NOW)).code).toBe('event_retracted');
		expect(thrown(() => addComment(w.duty, w.candidateId, { body: 'still worth a look?' }, NOW)).code).toBe('event_retracted');
		expect(db.select().from(table.candidateSpectrum).all()).toHaveLength(0);
		expect(spectrumFiles()).toEqual([]);
	});
});

describe('classifications', () => {
	it('disagreeing classifications are summarised as such, e-mailed each time, and the candidate is marked disputed', async () => {
		expect.hasAssertions();
		const s = await uploadSpectrum(w.spectroA, w.candidateId, { bytes: new Uint8Array(fixture('candidates/spectra/ascii-basic.txt')), fileName: 'a.txt' }, NOW);
		const first = classifyCandidate(w.spectroA, w.candidateId, { label: 'kilonova', confidence: 'high', redshift: 0.035, spectrumId: s.id, notes: 'featureless red continuum' }, NOW);
		expect(first.summary.text).toBe('Classified as kilonova (high) by Priya Spectro.');
		const second = classifyCandidate(w.spectroB, w.candidateId, { label: 'sn-ia', confidence: 'medium' }, new Date(NOW.getTime() + 60_000));
		expect(second.summary.status).toBe('disputed');
		expect(second.summary.text).toBe('2 classifications disagree: kilonova (high), type Ia supernova (medium).');
		expect(db.select({ c: table.candidate.classification }).from(table.candidate).where(eq(table.candidate.id, w.candidateId)).get()?.c).toBe('disputed');
		// Sten changes his mind: his latest opinion replaces his earlier one, and they agree.
		const third = classifyCandidate(w.spectroB, w.candidateId, { label: 'kilonova', confidence: 'medium' }, new Date(NOW.getTime() + 120_000));
		expect(third.summary.text).toBe('Classified as kilonova (high) by all 2 classifiers.');
		expect(db.select({ c: table.candidate.classification }).from(table.candidate).where(eq(table.candidate.id, w.candidateId)).get()?.c).toBe('kilonova');
		expect(logged('candidate.classified').filter((r) => r.room === 'board')).toHaveLength(3);

		await classificationMailIdle();
		const duty = await mailTo(w.duty.email, 3);
		expect(duty.map((m) => m.subject).sort()).toEqual(
			[
				`Classified: ${w.candidateName} in ${w.sourceEventId} as kilonova (high, z = 0.035)`,
				`Classified: ${w.candidateName} in ${w.sourceEventId} as type Ia supernova (medium) · classifications disagree`,
				`Classified: ${w.candidateName} in ${w.sourceEventId} as kilonova (medium)`
			].sort()
		);
		expect(duty.find((m) => m.subject.includes('disagree'))!.text).toContain('2 classifications disagree: kilonova (high), type Ia supernova (medium).');
		expect(await mailTo(w.coordinator.email, 3)).toHaveLength(3);
	});
	it('refuses bad fields by name, a spectrum of another candidate, and observers', () => {
		expect.hasAssertions();
		const e = thrown(() => classifyCandidate(w.spectroA, w.candidateId, { label: 'supernova', confidence: 'sure', redshift: 12 }, NOW));
		expect(e.status).toBe(422);
		expect(Object.keys(e.fields).sort()).toEqual(['confidence', 'label', 'redshift']);
		expect(thrown(() => classifyCandidate(w.spectroA, w.candidateId, { label: 'kilonova', confidence: 'low', spectrumId: 'elsewhere' }, NOW)).status).toBe(404);
		expect(thrown(() => classifyCandidate(w.observer, w.candidateId, { label: 'kilonova', confidence: 'low' }, NOW)).status).toBe(403);
		expect(db.select().from(table.candidateClassification).all()).toHaveLength(0);
	});
});

describe('decisions, discussion and the candidate detail', () => {
	it('a rejection needs a reason and a reopening a note; repeating the state is refused', () => {
		expect.hasAssertions();
		expect(Object.keys(thrown(() => decideCandidate(w.observer, w.candidateId, { state: 'rejected' }, NOW)).fields)).toEqual(['reason']);
		expect(decideCandidate(w.observer, w.candidateId, { state: 'rejected', reason: 'known-variable' }, NOW).summary).toBe('rejected as a known variable source');
		expect(thrown(() => decideCandidate(w.observer, w.candidateId, { state: 'rejected', reason: 'known-variable' }, NOW)).code).toBe('same_state');
		expect(thrown(() => decideCandidate(w.observer, w.candidateId, { state: 'open' }, NOW)).fields).toEqual({ note: 'say why the candidate is reopened' });
		expect(thrown(() => decideCandidate(w.viewer, w.candidateId, { state: 'promoted' }, NOW)).status).toBe(403);
		expect(decideCandidate(w.coordinator, w.candidateId, { state: 'promoted', note: 'best so far' }, NOW).summary).toBe('promoted for spectroscopy');
	});
	it('getCandidateDetail gathers position, discovery, reporter, vetting, photometry, spectra, classifications, discussion and history', async () => {
		expect.hasAssertions();
		await addPhotometryCsv({ user: w.observer }, w.candidateId, kilonovaCsv(), NOW);
		decideCandidate(w.duty, w.candidateId, { state: 'promoted' }, NOW);
		takeCandidate(w.spectroA, w.candidateId, { note: 'tonight' }, NOW);
		const s = await uploadSpectrum(w.spectroA, w.candidateId, { bytes: new Uint8Array(fixture('candidates/spectra/ascii-basic.txt')), fileName: 'a.txt' }, NOW);
		classifyCandidate(w.spectroA, w.candidateId, { label: 'kilonova', confidence: 'high', spectrumId: s.id }, NOW);
		expect(thrown(() => addComment(w.viewer, w.candidateId, { body: 'hello' }, NOW)).status).toBe(403);
		expect(thrown(() => addComment(w.duty, w.candidateId, { body: '   ' }, NOW)).fields).toEqual({ body: 'write something' });
		addComment(w.duty, w.candidateId, { body: 'Red and fading: consistent with the models.' }, NOW);

		const d = getCandidateDetail(w.eventId, w.candidateName.toLowerCase(), NOW)!;
		expect(d.candidate).toMatchObject({ id: w.candidateId, raDeg: 150.2, decDeg: -29.9, filter: 'g', reportedBy: 'Olga Observer', state: 'promoted', classification: 'kilonova' });
		expect(d.event).toMatchObject({ id: w.eventId, sourceEventId: w.sourceEventId, state: 'active' });
		expect(d.hoursSinceMerger).toBeCloseTo((NOW.getTime() - Date.parse('2026-12-02T03:04:05Z')) / 3_600_000, 10);
		expect(d.decision?.summary).toBe('promoted for spectroscopy');
		expect(d.vetting?.rules.verdict).toBeDefined();
		expect(d.photometry).toHaveLength(17);
		expect(d.spectra.map((x) => x.id)).toEqual([s.id]);
		expect(d.take).toBeNull();
		expect(d.takes.map((t) => t.state)).toEqual(['done']);
		expect(d.classificationSummary.text).toBe('Classified as kilonova (high) by Priya Spectro.');
		expect(d.discussion.map((c) => [c.userName, c.body])).toEqual([['Dmitri Duty', 'Red and fading: consistent with the models.']]);
		expect(d.history.map((h) => h.action)).toEqual(
			expect.arrayContaining(['candidate.reported', 'candidate.photometry', 'candidate.vetted', 'candidate.decided', 'candidate.taken', 'candidate.spectrum', 'candidate.classified', 'candidate.comment'])
		);
		expect(getCandidateDetail(w.eventId, 'no-such-name')).toBeNull();
		await vettingIdle();
	});
});

describe('what the pages draw and list', () => {
	it('a stored spectrum comes back as points, thinned evenly to the limit with its errors', async () => {
		const s = await uploadSpectrum(w.spectroA, w.candidateId, { bytes: fixture('candidates/spectra/ascii-basic.txt'), fileName: 'ascii-basic.txt' }, NOW);
		const all = (await spectrumPoints(w.candidateId, s.id))!;
		expect(all.totalPoints).toBe(300);
		expect(all.wavelength).toHaveLength(300);
		expect(all.wavelength[0]).toBe(3600);
		expect(all.error).toHaveLength(300);
		const thin = (await spectrumPoints(w.candidateId, s.id, 100))!;
		expect(thin.wavelength).toHaveLength(100);
		expect(thin.wavelength[1]).toBe(all.wavelength[3]);
		expect(await spectrumPoints(w.candidateId, 'no-such-spectrum')).toBeNull();
	});

	it('the lists get each candidate\'s verdict, credible level and spectra count', async () => {
		await addPhotometryCsv({ user: w.observer }, w.candidateId, kilonovaCsv(), NOW);
		getCandidateDetail(w.eventId, w.candidateName, NOW);
		await uploadSpectrum(w.spectroA, w.candidateId, { bytes: fixture('candidates/spectra/ascii-basic.txt'), fileName: 'a.txt' }, NOW);
		const s = vettingSummaries([w.candidateId]).get(w.candidateId)!;
		const detail = getCandidateDetail(w.eventId, w.candidateName, NOW)!;
		expect(s.verdict).toBe(detail.vetting!.rules.verdict);
		expect(s.credibleLevel).toBe(detail.vetting!.sky?.credibleLevel ?? null);
		expect(s.spectra).toBe(1);
		expect(vettingSummaries([])).toEqual(new Map());
	});
});
