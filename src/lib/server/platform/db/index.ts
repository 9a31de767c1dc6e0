import Database from 'better-sqlite3';
import { drizzle, type BetterSQLite3Database } from 'drizzle-orm/better-sqlite3';
import { migrate } from 'drizzle-orm/better-sqlite3/migrator';
import { mkdirSync } from 'node:fs';
import { dirname, resolve } from 'node:path';
import * as schema from './schema';

export type DB = BetterSQLite3Database<typeof schema> & { $client: Database.Database };

export const DEFAULT_DATABASE_FILE = 'data/strainline.sqlite';

/**
 * The process's database. A live binding: `openDatabase` (start-up) or `useDatabase` (tests)
 * set it once, and every module that imported `db` sees the same connection.
 */
export let db: DB = undefined as unknown as DB;

function configure(client: Database.Database) {
	client.pragma('journal_mode = WAL');
	client.pragma('foreign_keys = ON');
	client.pragma('busy_timeout = 5000');
	client.pragma('synchronous = NORMAL');
	// 32 MB of page cache (the default is 2 MB) and temporary sorts in memory: page loads read the
	// same event's rows again and again.
	client.pragma('cache_size = -32000');
	client.pragma('temp_store = MEMORY');
}

/** Open a SQLite file (or ':memory:'), apply pragmas and every migration in `drizzle/`. */
export function connect(url: string, migrationsFolder = resolve(process.cwd(), 'drizzle')): DB {
	const file = url.startsWith('file:') ? url.slice(5) : url;
	if (file !== ':memory:') mkdirSync(dirname(resolve(file)), { recursive: true });
	const client = new Database(file);
	configure(client);
	const database = drizzle(client, { schema }) as DB;
	migrate(database, { migrationsFolder });
	return database;
}

export function openDatabase(url = process.env.DATABASE_URL || DEFAULT_DATABASE_FILE): DB {
	if (!db) db = connect(url);
	return db;
}

export function useDatabase(database: DB): void {
	db = database;
}

export { schema };

/**
 * A query prepared once per connection and reused: for the few queries every request runs (the
 * session lookup), where preparing the statement again each time costs more than running it.
 * `build` gets the current connection and returns a drizzle `.prepare()`d query with placeholders.
 */
const preparedByDb = new WeakMap<DB, Map<string, unknown>>();
export function preparedQuery<T>(key: string, build: (database: DB) => T): T {
	let cache = preparedByDb.get(db);
	if (!cache) preparedByDb.set(db, (cache = new Map()));
	let hit = cache.get(key) as T | undefined;
	if (hit === undefined) cache.set(key, (hit = build(db)));
	return hit;
}
