/**
 * Server-wide secrets by name, for signing links that must work without signing in (unsubscribe).
 * `STRAINLINE_SECRET_<NAME>` in the environment wins (several servers sharing one database do not
 * need it: they share the stored one); otherwise 32 random bytes are made once and kept in the
 * database, so links stay valid across restarts. Read on each use: tests switch databases.
 */
import { eq } from 'drizzle-orm';
import { decodeBase64, encodeBase64 } from '@oslojs/encoding';
import { db } from './db';
import * as table from './db/schema';

export function serverSecret(name: string): Uint8Array {
	const fromEnv = process.env[`STRAINLINE_SECRET_${name.toUpperCase().replace(/[^A-Z0-9]/g, '_')}`]?.trim();
	if (fromEnv) return new TextEncoder().encode(fromEnv);
	const stored = db.select({ value: table.serverSecret.value }).from(table.serverSecret).where(eq(table.serverSecret.name, name)).get();
	if (stored) return decodeBase64(stored.value);
	// Two processes making it at once: the first insert wins and both read that one.
	const value = encodeBase64(crypto.getRandomValues(new Uint8Array(32)));
	db.insert(table.serverSecret).values({ name, value }).onConflictDoNothing().run();
	return decodeBase64(db.select({ value: table.serverSecret.value }).from(table.serverSecret).where(eq(table.serverSecret.name, name)).get()!.value);
}
