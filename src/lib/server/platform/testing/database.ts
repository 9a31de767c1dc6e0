import { connect, useDatabase, type DB } from '../db';

/** A fresh in-memory database with every migration applied, installed as the process's `db`. */
export function createTestDatabase(): DB {
	const database = connect(':memory:');
	useDatabase(database);
	return database;
}
