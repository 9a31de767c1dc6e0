/**
 * Values worked out once per change of what they are built from, shared by every request that
 * asks while nothing changed: a crowd loading the same event page costs one build, not one per
 * viewer. The caller passes a version (a cheap token that changes whenever the inputs do, such as
 * the latest event-log entry of the rooms involved, `realtime.ts roomsVersion`); an entry is also
 * dropped after `ttlMs`, so that a change written without a log entry shows up within that time.
 * Builds that arrive together wait for the same promise; a failed build is not kept.
 * Entries belong to the database connection they were read from (tests swap connections).
 */
import { db, type DB } from './db';

export interface VersionedCache<T> {
	get(key: string, version: string, build: () => T | Promise<T>): Promise<T>;
	/** Entries held now (for tests). */
	size(): number;
}

export function versionedCache<T>(o: { max: number; ttlMs: number; now?: () => number }): VersionedCache<T> {
	const now = o.now ?? Date.now;
	const byDb = new WeakMap<DB, Map<string, { version: string; atMs: number; value: Promise<T> }>>();
	const entriesNow = () => {
		let entries = byDb.get(db);
		if (!entries) byDb.set(db, (entries = new Map()));
		return entries;
	};
	return {
		get(key, version, build) {
			const entries = entriesNow();
			const hit = entries.get(key);
			if (hit && hit.version === version && now() - hit.atMs < o.ttlMs) return hit.value;
			const value = Promise.resolve().then(build);
			const entry = { version, atMs: now(), value };
			entries.delete(key);
			entries.set(key, entry);
			while (entries.size > o.max) entries.delete(entries.keys().next().value!);
			value.catch(() => {
				if (entries.get(key) === entry) entries.delete(key);
			});
			return value;
		},
		size: () => entriesNow().size
	};
}
