/**
 * Stored files (sky maps, uploads) under one folder: `STORAGE_DIR` or `data/` by default.
 * Rows keep paths relative to that folder, so the folder can move with the database.
 */
import { createHash, randomBytes } from 'node:crypto';
import { mkdirSync, readFileSync, renameSync, rmSync, writeFileSync, existsSync } from 'node:fs';
import { mkdir, readFile, rename, writeFile } from 'node:fs/promises';
import { dirname, isAbsolute, relative, resolve, sep } from 'node:path';
import { config } from './config';

let rootOverride: string | null = null;

/** Tests point storage at a temporary folder. */
export function useStorageRoot(dir: string | null): void {
	rootOverride = dir;
}

export function storageRoot(): string {
	return resolve(rootOverride ?? config.alerts.storageDir);
}

/** Absolute path of a stored file; refuses anything that would leave the storage folder. */
export function storagePath(relativePath: string): string {
	if (!relativePath || isAbsolute(relativePath)) throw new Error(`bad stored path "${relativePath}"`);
	const root = storageRoot();
	const full = resolve(root, relativePath);
	const rel = relative(root, full);
	if (rel.startsWith('..') || isAbsolute(rel) || rel.split(sep).includes('..')) throw new Error(`stored path "${relativePath}" leaves the storage folder`);
	return full;
}

const SAFE_SEGMENT = /^[A-Za-z0-9][A-Za-z0-9._-]{0,127}$/;

export interface StoredFile {
	path: string;
	bytes: number;
	sha256: string;
}

/**
 * Write bytes to `folder/name` (each segment letters, digits, `._-`), via a temporary file and
 * a rename so that a reader never sees half a file.
 */
export function saveFile(folder: string, name: string, bytes: Uint8Array): StoredFile {
	const segments = [...folder.split('/'), name];
	for (const s of segments) if (!SAFE_SEGMENT.test(s)) throw new Error(`bad file name segment "${s}"`);
	const rel = segments.join('/');
	const full = storagePath(rel);
	mkdirSync(dirname(full), { recursive: true });
	const tmp = `${full}.${randomBytes(4).toString('hex')}.part`;
	writeFileSync(tmp, bytes);
	renameSync(tmp, full);
	return { path: rel, bytes: bytes.byteLength, sha256: createHash('sha256').update(bytes).digest('hex') };
}

/**
 * `saveFile` without holding the event loop: written asynchronously, with the checksum the caller
 * computed off the loop (a 100 MB sky map takes a noticeable time to hash; the work pool's
 * `analyseSkymap` gives it).
 */
export async function saveFileAsync(folder: string, name: string, bytes: Uint8Array, sha256: string): Promise<StoredFile> {
	const segments = [...folder.split('/'), name];
	for (const s of segments) if (!SAFE_SEGMENT.test(s)) throw new Error(`bad file name segment "${s}"`);
	const rel = segments.join('/');
	const full = storagePath(rel);
	await mkdir(dirname(full), { recursive: true });
	const tmp = `${full}.${randomBytes(4).toString('hex')}.part`;
	await writeFile(tmp, bytes);
	await rename(tmp, full);
	return { path: rel, bytes: bytes.byteLength, sha256 };
}

/** `readStoredFile` without holding the event loop. */
export function readStoredFileAsync(relativePath: string): Promise<Buffer> {
	return readFile(storagePath(relativePath));
}

export function readStoredFile(relativePath: string): Buffer {
	return readFileSync(storagePath(relativePath));
}

/** Remove a stored file (a row that was to point at it could not be written); absent files are fine. */
export function deleteStoredFile(relativePath: string): void {
	rmSync(storagePath(relativePath), { force: true });
}

export function storedFileExists(relativePath: string): boolean {
	try {
		return existsSync(storagePath(relativePath));
	} catch {
		return false;
	}
}

/** Sky maps: `skymaps/{eventId}/{noticeId}.fits[.gz]`. */
export function saveSkymapFile(eventId: string, noticeId: string, bytes: Uint8Array): StoredFile {
	const gz = bytes.length >= 2 && bytes[0] === 0x1f && bytes[1] === 0x8b;
	return saveFile(`skymaps/${eventId}`, `${noticeId}.fits${gz ? '.gz' : ''}`, bytes);
}

/** `saveSkymapFile`, written asynchronously with a checksum computed off the loop. */
export function saveSkymapFileAsync(eventId: string, noticeId: string, bytes: Uint8Array, sha256: string): Promise<StoredFile> {
	const gz = bytes.length >= 2 && bytes[0] === 0x1f && bytes[1] === 0x8b;
	return saveFileAsync(`skymaps/${eventId}`, `${noticeId}.fits${gz ? '.gz' : ''}`, bytes, sha256);
}

/** A sky-map file uploaded by hand, kept before its notice is processed. */
export function saveUpload(bytes: Uint8Array): StoredFile {
	const gz = bytes.length >= 2 && bytes[0] === 0x1f && bytes[1] === 0x8b;
	const sha = createHash('sha256').update(bytes).digest('hex');
	return saveFile('uploads', `${sha.slice(0, 32)}.fits${gz ? '.gz' : ''}`, bytes);
}
