/**
 * A crowded event for the page benchmark and the page-size test: many pointings by the demo
 * telescopes, written straight into the observation table in one transaction (what
 * `coordination/observations.ts` would store for a report, without its checks and log entries:
 * 18,000 reports through the domain function would take minutes and are not what is measured).
 *
 * Pointings are spread over the event's ranked galaxies (narrow-field telescopes) and over a grid
 * of positions around the first-ranked galaxy (wide-field telescopes), observed one after another
 * from two minutes after the merger to `until`, each telescope with its own filter and depth.
 */
import { asc, eq } from 'drizzle-orm';
import type { DB } from '../../../src/lib/server/platform/db/index.ts';
import * as table from '../../../src/lib/server/platform/db/schema.ts';

export interface CrowdOptions {
	pointings: number;
	/** Latest observation time (the earliest is the event's merger time). */
	until?: Date;
}

/** Insert `pointings` observations for `eventId`; returns how many were written. */
export function addCrowdOfPointings(database: DB, eventId: string, o: CrowdOptions): number {
	const event = database.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!event) throw new Error(`no event ${eventId}`);
	const scopes = database.select().from(table.telescope).orderBy(asc(table.telescope.name)).all();
	if (scopes.length === 0) throw new Error('no telescopes: seed the demo first');
	const galaxies = database
		.select({ raDeg: table.galaxy.raDeg, decDeg: table.galaxy.decDeg })
		.from(table.eventGalaxy)
		.innerJoin(table.galaxy, eq(table.galaxy.id, table.eventGalaxy.galaxyId))
		.where(eq(table.eventGalaxy.eventId, eventId))
		.orderBy(asc(table.eventGalaxy.rank))
		.limit(2000)
		.all();
	const centre = galaxies[0] ?? { raDeg: 120, decDeg: -20 };
	const startMs = (event.eventTime ?? event.createdAt).getTime();
	const endMs = (o.until ?? new Date()).getTime();
	const stepMs = Math.max(1, Math.floor((endMs - startMs - 120_000) / (o.pointings + 1)));
	const insert = database.$client.prepare(
		`INSERT INTO observation (id, event_id, telescope_id, team_id, observed_at, ra_deg, dec_deg, field_id, filter, exposure_s, limiting_mag, seeing_arcsec, notes, source, created_at)
		 VALUES (?, ?, ?, ?, ?, ?, ?, NULL, ?, ?, ?, ?, '', 'api', ?)`
	);
	const wrap = (ra: number) => ((ra % 360) + 360) % 360;
	database.$client.transaction(() => {
		// The notices reached us a minute after the merger, so that every pointing falls inside the
		// event's replay (which starts at the first notice's receipt).
		const receivedMs = startMs + 60_000;
		database.$client.prepare('UPDATE notice_inbox SET received_at = ? WHERE id IN (SELECT inbox_id FROM notice WHERE event_id = ?)').run(receivedMs, eventId);
		database.$client.prepare('UPDATE notice SET created_at = ? WHERE event_id = ?').run(receivedMs, eventId);
		for (let k = 0; k < o.pointings; k++) {
			const scope = scopes[k % scopes.length];
			const wide = scope.fovWidthDeg >= 1;
			let raDeg: number;
			let decDeg: number;
			if (wide || galaxies.length === 0) {
				// A 15 × 15 grid of field centres one field apart, visited again and again.
				const cell = Math.floor(k / scopes.length) % 225;
				decDeg = Math.max(-89, Math.min(89, centre.decDeg + ((cell % 15) - 7) * scope.fovHeightDeg));
				raDeg = wrap(centre.raDeg + (Math.floor(cell / 15) - 7) * scope.fovWidthDeg / Math.max(0.2, Math.cos((decDeg * Math.PI) / 180)));
			} else {
				const g = galaxies[Math.floor(k / scopes.length) % galaxies.length];
				raDeg = g.raDeg;
				decDeg = g.decDeg;
			}
			const at = startMs + 120_000 + (k + 1) * stepMs;
			const filter = scope.filters[k % scope.filters.length];
			insert.run(`crowd-${eventId.slice(0, 8)}-${k}`, eventId, scope.id, scope.teamId, at, raDeg, decDeg, filter, 120, scope.limitingMag - 0.3 * (k % 3), 1.2, at + 5000);
		}
	})();
	return o.pointings;
}
