/**
 * What SQLite's single writer allows (docs/scaling.md): small write transactions of the size a
 * claim or a pointing writes (two event-log-like rows: the event's room and the board), on a file
 * database with the app's pragmas (WAL, synchronous = NORMAL), one after another. Reference in the
 * same run: the same transactions on an in-memory database (no file, no WAL), the floor for the
 * statement work itself. The app's routes add their reads and checks around such a write; the
 * writer is held only for the transaction.
 */
import Database from 'better-sqlite3';
import { mkdtempSync, rmSync } from 'node:fs';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { median, type BenchResult } from './run.ts';

const TRANSACTIONS = 5000;

/** Milliseconds per 1,000 transactions, five runs. */
function perThousandMs(db: Database.Database): number[] {
	db.exec('create table log (seq integer primary key, room text not null, action text not null, payload text not null, created_at integer not null)');
	const insert = db.prepare('insert into log (room, action, payload, created_at) values (?, ?, ?, ?)');
	const payload = JSON.stringify({ eventId: 'ev_0123456789abcdef', claimId: 'cl_0123456789abcdef', target: { ra: 201.365, dec: -43.019 }, filter: 'r', epoch: 1 });
	const write = db.transaction(() => {
		insert.run('event:ev_0123456789abcdef', 'claim.claimed', payload, Date.now());
		insert.run('board', 'claim.claimed', payload, Date.now());
	});
	for (let k = 0; k < 500; k++) write();
	const runs: number[] = [];
	for (let r = 0; r < 5; r++) {
		const t0 = performance.now();
		for (let k = 0; k < TRANSACTIONS; k++) write();
		runs.push(((performance.now() - t0) / TRANSACTIONS) * 1000);
	}
	return runs;
}

export async function run(): Promise<BenchResult[]> {
	const dir = mkdtempSync(join(tmpdir(), 'strainline-writer-'));
	try {
		const file = new Database(join(dir, 'bench.sqlite'));
		file.pragma('journal_mode = WAL');
		file.pragma('synchronous = NORMAL');
		const onFile = median(perThousandMs(file));
		file.close();
		const memory = new Database(':memory:');
		const inMemory = median(perThousandMs(memory));
		memory.close();
		return [
			{
				suite: 'sqlite writer',
				name: '1,000 two-row write transactions, WAL file',
				strainlineMs: onFile,
				referenceMs: inMemory,
				reference: 'same transactions, in-memory database',
				note: `${Math.round(1_000_000 / onFile)} transactions/s · load ${loadavg()[0].toFixed(1)}`
			}
		];
	} finally {
		rmSync(dir, { recursive: true, force: true });
	}
}
