/**
 * Spectra of a candidate: a 1-D spectrum file (ASCII, FITS table or FITS 1-D image, gzip or not)
 * is read with lib/candidates/spectrum.ts BEFORE anything is stored; a file that cannot be read
 * is refused with the reader's one-line reason and leaves nothing behind. Stored files live in the
 * storage folder (`spectra/{candidateId}/{spectrumId}.{ext}`), never under static/.
 */
import { and, desc, eq } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId, type SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { actorOf, record } from '../platform/realtime';
import { deleteStoredFile, readStoredFile, saveFile } from '../platform/storage';
import { fileSizeProblem, SpectrumError, type SpectrumSummary } from '../../candidates/spectrum.ts';
import { runWork } from '../platform/work-pool';
import { ownedBytes } from '../platform/work-memory.ts';
import { CandidateError, candidateForWork } from './candidates';
import { completeTake } from './takers';

/** Largest spectrum accepted, bytes: 1-D spectra are kilobytes to a few megabytes (our choice, below the reader's 20 MiB). */
export const MAX_SPECTRUM_BYTES = 10 * 1024 * 1024;

export const spectrumMeta = z.object({
	fileName: z.string().trim().max(200, 'the file name must be at most 200 characters').optional(),
	notes: z.string().trim().max(2000, 'notes must be at most 2000 characters').optional()
});

export interface SpectrumView {
	id: string;
	originalName: string;
	bytes: number;
	format: table.CandidateSpectrum['format'];
	summary: SpectrumSummary;
	notes: string;
	uploadedBy: string;
	createdAt: string;
}

const EXTENSIONS: Record<table.CandidateSpectrum['format'], string> = { ascii: 'txt', 'fits-table': 'fits', 'fits-image': 'fits' };

function megabytes(n: number): string {
	return `${(n / 1024 / 1024).toFixed(1)} MB`;
}

/**
 * Upload a spectrum. Refusals as CandidateError: 403 without the permission, 404, 409 retracted
 * event, 413 `too_large` over MAX_SPECTRUM_BYTES, 422 `invalid_spectrum` when the file cannot be
 * read as a spectrum (empty, text in a number column, one column, a truncated FITS file, …) with
 * the reader's reason. The uploader's own open take of the candidate ends as done. The file is read
 * on the work pool; the caller keeps `file.bytes` (a spectrum is at most 10 MB: one copy is moved).
 */
export async function uploadSpectrum(user: SessionUser, candidateId: string, file: { bytes: Uint8Array; fileName?: string; notes?: string }, now = new Date()): Promise<SpectrumView> {
	if (!can({ user }, 'candidates.spectroscopy')) throw new CandidateError(403, 'forbidden', 'Your role does not allow uploading spectra.');
	const { candidate, event } = candidateForWork(candidateId, 'spectra are not taken');
	const meta = spectrumMeta.safeParse({ fileName: file.fileName, notes: file.notes });
	if (!meta.success) throw new CandidateError(422, 'invalid', meta.error.issues[0].message, { [String(meta.error.issues[0].path[0] ?? 'file')]: meta.error.issues[0].message });
	const name = meta.data.fileName || 'spectrum';
	if (file.bytes.length > MAX_SPECTRUM_BYTES)
		throw new CandidateError(
			413,
			'too_large',
			`${name} is ${megabytes(file.bytes.length)} (${file.bytes.length.toLocaleString('en')} bytes), over the limit of ${megabytes(MAX_SPECTRUM_BYTES)} (${MAX_SPECTRUM_BYTES.toLocaleString('en')} bytes) for a spectrum.`,
			{ file: 'over the size limit' }
		);
	const empty = fileSizeProblem(file.bytes.length, MAX_SPECTRUM_BYTES);
	if (empty) throw new CandidateError(422, 'invalid_spectrum', `${name} cannot be read as a spectrum: ${empty}.`, { file: empty });
	let summary: SpectrumSummary;
	let format: table.CandidateSpectrum['format'];
	let bytes: Uint8Array;
	try {
		const given = new Uint8Array(file.bytes);
		const read = await runWork('readSpectrum', { bytes: given, options: { maxBytes: MAX_SPECTRUM_BYTES } }, { transfer: [given.buffer] });
		summary = read.summary;
		format = read.spectrum.format;
		bytes = read.bytes;
	} catch (e) {
		if (e instanceof SpectrumError) throw new CandidateError(422, 'invalid_spectrum', `${name} cannot be read as a spectrum: ${e.message}.`, { file: e.message });
		throw e;
	}
	const id = randomId();
	const gz = bytes[0] === 0x1f && bytes[1] === 0x8b;
	const stored = saveFile(`spectra/${candidate.id}`, `${id}.${EXTENSIONS[format]}${gz ? '.gz' : ''}`, bytes);
	try {
		db.insert(table.candidateSpectrum)
			.values({
				id,
				candidateId: candidate.id,
				filePath: stored.path,
				originalName: name,
				bytes: stored.bytes,
				sha256: stored.sha256,
				format,
				summary,
				notes: meta.data.notes ?? '',
				uploadedByUserId: user.id,
				createdAt: now
			})
			.run();
	} catch (e) {
		// Nothing half-stored: without its row the file would be an orphan.
		deleteStoredFile(stored.path);
		throw e;
	}
	const takeId = completeTake(user.id, candidate.id, now);
	record(actorOf(user), 'candidate.spectrum', `event:${event.id}`, {
		candidateId: candidate.id,
		eventId: event.id,
		name: candidate.name,
		spectrumId: id,
		format,
		points: summary.points,
		wavelengthMin: summary.wavelengthMin,
		wavelengthMax: summary.wavelengthMax,
		completedTakeId: takeId
	});
	return listSpectra(candidate.id).find((s) => s.id === id)!;
}

/** A candidate's spectra, newest first. */
export function listSpectra(candidateId: string): SpectrumView[] {
	return db
		.select({ s: table.candidateSpectrum, userName: table.user.name })
		.from(table.candidateSpectrum)
		.leftJoin(table.user, eq(table.user.id, table.candidateSpectrum.uploadedByUserId))
		.where(eq(table.candidateSpectrum.candidateId, candidateId))
		.orderBy(desc(table.candidateSpectrum.createdAt))
		.all()
		.map(({ s, userName }) => ({
			id: s.id,
			originalName: s.originalName,
			bytes: s.bytes,
			format: s.format,
			summary: s.summary,
			notes: s.notes,
			uploadedBy: userName ?? '—',
			createdAt: s.createdAt.toISOString()
		}));
}

/** The stored file of one spectrum of a candidate, for download; null when there is none. */
export function spectrumFile(candidateId: string, spectrumId: string): { bytes: Buffer; originalName: string; format: table.CandidateSpectrum['format'] } | null {
	const s = db
		.select()
		.from(table.candidateSpectrum)
		.where(and(eq(table.candidateSpectrum.id, spectrumId), eq(table.candidateSpectrum.candidateId, candidateId)))
		.get();
	if (!s) return null;
	return { bytes: readStoredFile(s.filePath), originalName: s.originalName, format: s.format };
}

/** Points of one spectrum for a chart: at most `maxPoints`, evenly thinned (every k-th sample) when the file has more. */
export interface SpectrumPoints {
	id: string;
	wavelength: number[];
	flux: number[];
	error: number[] | null;
	wavelengthUnit: string | null;
	fluxUnit: string | null;
	/** Samples in the file; more than wavelength.length when thinned. */
	totalPoints: number;
}

/** The parsed samples of one stored spectrum (read on the work pool), thinned to `maxPoints`; null when there is no such spectrum or it no longer reads. */
export async function spectrumPoints(candidateId: string, spectrumId: string, maxPoints = 4000): Promise<SpectrumPoints | null> {
	const file = spectrumFile(candidateId, spectrumId);
	if (!file) return null;
	let s;
	try {
		const bytes = ownedBytes(file.bytes);
		s = (await runWork('readSpectrum', { bytes, options: {} }, { transfer: [bytes.buffer] })).spectrum;
	} catch (e) {
		if (e instanceof SpectrumError) return null;
		throw e;
	}
	const n = s.wavelength.length;
	// Plain striding keeps the shape of a smooth spectrum well enough for a look; the download has every sample.
	const step = Math.max(1, Math.ceil(n / maxPoints));
	const pick = (a: Float64Array) => {
		const out: number[] = [];
		for (let i = 0; i < n; i += step) out.push(a[i]);
		return out;
	};
	return {
		id: spectrumId,
		wavelength: pick(s.wavelength),
		flux: pick(s.flux),
		error: s.error ? pick(s.error) : null,
		wavelengthUnit: s.wavelengthUnit,
		fluxUnit: s.fluxUnit,
		totalPoints: n
	};
}
