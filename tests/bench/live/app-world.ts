/**
 * The live benchmark's world, written into a fresh temporary SQLite file before the app starts:
 * the demo collaboration (people, teams, telescopes, the synthetic galaxy catalogue), one event
 * made from a fixture notice with a generated sky map (opposite the Sun) uploaded beside it (ingested, analysed and ranked
 * by Strainline's own code, as the upload page would do), and API tokens: one per demo person for
 * the socket.io clients, two people who may claim, and one token per telescope for observations.
 * With `catalogRows` a synthetic catalogue of that many galaxies (seeds/synthetic-catalog.ts) is
 * imported through the app's catalogue import before the notice, so the event is ranked against
 * it and a later update re-ranks it; the demo observer of a third telescope uploads pointings.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { asc, eq, inArray } from 'drizzle-orm';

export interface BenchTelescope {
	id: string;
	name: string;
	/** A telescope API token (no person behind it), as a robotic telescope would hold. */
	token: string;
}

export interface BenchTarget {
	galaxyId: number;
	raDeg: number;
	decDeg: number;
}

export interface AppWorld {
	eventId: string;
	/** One token per demo person, for the listening clients. */
	listenerTokens: string[];
	/** Tokens of people allowed to claim on both telescopes (an observer of both teams, a coordinator). */
	claimerTokens: string[];
	telescopes: BenchTelescope[];
	/** Ranked galaxies of the event, best first. */
	targets: BenchTarget[];
	/** What an update notice for the same event needs. */
	notice: { sourceId: string; ivorn: string; eventTime: string; antiSunRaDeg: number };
	/** An observer's token and a telescope of their team that the driver never claims with (no claim is completed). */
	uploader: { token: string; telescope: { id: string; name: string; filter: string } };
	/** Galaxies in the catalogue the app ranks with (the newest ready one). */
	catalogGalaxies: number;
}

export interface WorldOptions {
	/** Import a synthetic catalogue of this many galaxies before the notice (0: the demo's 20,000 only). */
	catalogRows?: number;
}

/** Observer of both teams whose telescopes the bench uses (seeds/scenario.ts). */
const CLAIMERS = ['observer3@strainline.demo', 'coordinator@strainline.demo'];
/** Two narrow-field demo telescopes (galaxy targeting) of two teams, both with an r filter. */
const TELESCOPES = ['Saguaro 0.8 m', 'Tenaz 2.0 m'];
const SOURCE_ID = 'SX30099060';
/** The demo observer of the Altiplano team and its telescope, for the pointing upload. */
const UPLOADER = { email: 'observer@strainline.demo', telescope: 'Pardo 0.6 m', filter: 'r' };

export async function prepareAppWorld(root: string, dbFile: string, storageDir: string, options: WorldOptions = {}): Promise<AppWorld> {
	const { connect, useDatabase } = await import('../../../src/lib/server/platform/db/index.ts');
	const { seedDemo } = await import('../../../seeds/demo.ts');
	const { issueToken } = await import('../../../src/lib/server/people/tokens.ts');
	const { saveUpload, useStorageRoot } = await import('../../../src/lib/server/platform/storage.ts');
	const { commitNotice, processInbox } = await import('../../../src/lib/server/alerts/ingest.ts');
	const { installTargets, targetsIdle } = await import('../../../src/lib/server/targeting/rankings.ts');
	const table = await import('../../../src/lib/server/platform/db/schema.ts');

	// connect + useDatabase, not openDatabase: another bench module may have opened its own file already.
	const database = connect(dbFile, join(root, 'drizzle'));
	useDatabase(database);
	useStorageRoot(storageDir);
	const stopTargets = installTargets();
	try {
		await seedDemo(database);
		if (options.catalogRows) {
			const { importCatalog } = await import('../../../src/lib/server/targeting/catalogs.ts');
			const { generateSyntheticCatalog, syntheticCatalogCsv } = await import('../../../seeds/synthetic-catalog.ts');
			const o = { rows: options.catalogRows, maxDistanceMpc: 400, seed: 7 };
			const out = await importCatalog(
				{ userId: null, label: 'bench' },
				{ name: `Synthetic bench galaxies (${o.rows.toLocaleString('en')}, invented)`, sourceNote: 'seeds/synthetic-catalog.ts --seed 7', synthetic: true },
				syntheticCatalogCsv(generateSyntheticCatalog(o), o),
				{ progressEveryMs: null }
			);
			if (out.state !== 'ready' || out.rowCount !== o.rows) throw new Error(`bench catalogue import: ${out.state} ${out.error ?? ''}`);
		}
		// The event happened an hour ago, so that pointings reported "now" are plausible.
		const eventTime = new Date(Date.now() - 3600_000).toISOString();
		const xml = readFileSync(join(root, 'tests/fixtures/notices/bns-initial.xml'), 'utf8')
			.replaceAll('SX30041207', SOURCE_ID)
			.replace(/<ISOTime>\s*[^<]+\s*<\/ISOTime>/, `<ISOTime>${eventTime}</ISOTime>`)
			// Authored a minute after the merger (the fixture's date lies in 2030): an update the benches
			// publish now must be the later notice, or the event keeps showing this one's map.
			.replace(/<Date>\s*[^<]+\s*<\/Date>/, `<Date>${new Date(Date.parse(eventTime) + 60_000).toISOString()}</Date>`);
		// A compact map of our own opposite the Sun today: claims inside a telescope's Sun limit are
		// refused, and a fixed sky position drifts into the Sun's zone as the year turns.
		const { generateSkymap, skymapToFits } = await import('../../../fake-alert-broker/skymap.ts');
		const { sunPosition } = await import('../../../src/lib/targeting/sun-moon.ts');
		const antiSunRaDeg = (sunPosition({ latitudeDeg: 0, longitudeDeg: 0, elevationM: 0 }, new Date()).raDeg + 180) % 360;
		const map = skymapToFits(generateSkymap({ components: [{ raDeg: antiSunRaDeg, decDeg: -20, widthDeg: 2 }], distance: { meanMpc: 118, stdMpc: 24 } }), {
			object: SOURCE_ID,
			dateObs: eventTime.slice(0, 23)
		});
		const committed = commitNotice(xml, 'upload', { uploadedSkymapPath: saveUpload(new Uint8Array(map)).path });
		const outcome = await processInbox(committed.inboxId);
		await targetsIdle();
		const eventId = outcome.eventId;
		if (!eventId || outcome.error) throw new Error(`bench notice not ingested: ${outcome.outcome} ${outcome.error ?? ''}`);
		const event = database.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
		if (event?.state !== 'active') throw new Error(`bench event is ${event?.state}, not active`);

		const targets = database
			.select({ galaxyId: table.galaxy.id, raDeg: table.galaxy.raDeg, decDeg: table.galaxy.decDeg })
			.from(table.eventGalaxy)
			.innerJoin(table.galaxy, eq(table.galaxy.id, table.eventGalaxy.galaxyId))
			.where(eq(table.eventGalaxy.eventId, eventId))
			.orderBy(asc(table.eventGalaxy.rank))
			.all();
		if (targets.length < 8) throw new Error(`only ${targets.length} ranked galaxies for the bench event`);

		const people = database.select().from(table.user).all();
		const actor = { userId: null, label: 'bench' };
		const listenerTokens = people.map((p) => issueToken(actor, { name: 'live bench listener', userId: p.id }).secret);
		const claimerTokens = CLAIMERS.map((email) => {
			const p = people.find((x) => x.email === email);
			if (!p) throw new Error(`demo person ${email} missing`);
			return issueToken(actor, { name: 'live bench claimer', userId: p.id }).secret;
		});
		const scopes = database
			.select()
			.from(table.telescope)
			.where(inArray(table.telescope.name, TELESCOPES))
			.all();
		const telescopes = TELESCOPES.map((name) => {
			const t = scopes.find((s) => s.name === name);
			if (!t || !t.filters.includes('r')) throw new Error(`demo telescope ${name} missing or without an r filter`);
			return { id: t.id, name: t.name, token: issueToken(actor, { name: 'live bench telescope', telescopeId: t.id }).secret };
		});
		const uploaderPerson = people.find((p) => p.email === UPLOADER.email);
		const uploaderScope = database.select().from(table.telescope).where(eq(table.telescope.name, UPLOADER.telescope)).get();
		if (!uploaderPerson || !uploaderScope?.filters.includes(UPLOADER.filter)) throw new Error(`demo observer ${UPLOADER.email} or ${UPLOADER.telescope} missing`);
		const uploader = {
			token: issueToken(actor, { name: 'live bench uploader', userId: uploaderPerson.id }).secret,
			telescope: { id: uploaderScope.id, name: uploaderScope.name, filter: UPLOADER.filter }
		};
		const ivorn = /ivorn="([^"]+)"/.exec(xml)?.[1];
		if (!ivorn) throw new Error('bench notice has no IVORN');
		const { catalogInUse } = await import('../../../src/lib/server/alerts/events.ts');
		const { galaxyCount } = await import('../../../src/lib/server/targeting/catalogs.ts');
		const inUse = catalogInUse();
		return {
			eventId,
			listenerTokens,
			claimerTokens,
			telescopes,
			targets,
			notice: { sourceId: SOURCE_ID, ivorn, eventTime, antiSunRaDeg },
			uploader,
			catalogGalaxies: inUse ? galaxyCount(inUse) : 0
		};
	} finally {
		stopTargets();
		useStorageRoot(null);
		database.$client.close();
	}
}
