/**
 * Which galaxy catalogue an event is ranked against, and the claims its ranking no longer holds.
 *
 * An event keeps the catalogue that was in use when it arrived: importing another one does not
 * touch events under way (a four-galaxy test file once displaced the full catalogue of every live
 * event, and a team's open claim vanished from every page). A coordinator switches an event's
 * catalogue on purpose; for a live event only after confirming it. Switching logs
 * `targets.catalog-switched`, on which the ranking job re-ranks the event (rankings.ts).
 *
 * A claim is never dropped by a re-ranking: one whose target is no longer among the event's ranked
 * galaxies or fields is "outside the ranking" and listed apart, still valid, until its team
 * finishes or releases it.
 */
import { and, asc, desc, eq, inArray, notInArray, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { DomainError } from '../platform/errors';
import { actorOf, record } from '../platform/realtime';
import type { SessionUser } from '../people/auth';
import { getCatalog } from './catalogs';

/** Claim states that hold a target (open) or record it as observed (done): what a ranking must not hide. */
const HELD: table.ClaimState[] = ['claimed', 'observing', 'done'];

export interface CatalogChoice {
	id: string;
	name: string;
	synthetic: boolean;
	rowCount: number;
}

export interface CatalogSwitch {
	fromId: string | null;
	fromName: string | null;
	toId: string;
	toName: string;
	by: string;
	at: string;
}

export interface EventCatalogView {
	/** The catalogue the event is ranked against (null: survey fields only). */
	catalog: CatalogChoice | null;
	/** The catalogue the stored ranking used, when it differs (a re-ranking is under way). */
	rankedWith: CatalogChoice | null;
	reranking: boolean;
	/** The last switch made by a coordinator, so it can be undone. */
	lastSwitch: CatalogSwitch | null;
	/** Ready catalogues an event may be switched to. */
	choices: CatalogChoice[];
}

function choice(c: table.Catalog | null): CatalogChoice | null {
	return c ? { id: c.id, name: c.name, synthetic: c.synthetic, rowCount: c.rowCount } : null;
}

export function catalogChoices(): CatalogChoice[] {
	return db
		.select()
		.from(table.catalog)
		.where(eq(table.catalog.state, 'ready'))
		.orderBy(desc(table.catalog.readyAt), desc(table.catalog.createdAt))
		.all()
		.map((c) => choice(c)!);
}

function lastSwitch(eventId: string): CatalogSwitch | null {
	const row = db
		.select()
		.from(table.eventLog)
		.where(and(eq(table.eventLog.room, `event:${eventId}`), eq(table.eventLog.action, 'targets.catalog-switched')))
		.orderBy(desc(table.eventLog.seq))
		.limit(1)
		.get();
	if (!row) return null;
	const p = row.payload as { fromCatalogId?: string | null; fromName?: string | null; toCatalogId?: string; toName?: string };
	return { fromId: p.fromCatalogId ?? null, fromName: p.fromName ?? null, toId: p.toCatalogId ?? '', toName: p.toName ?? '', by: row.actorLabel, at: row.createdAt.toISOString() };
}

/** What the targets page shows about an event's catalogue; null when there is no such event. */
export function eventCatalogView(eventId: string): EventCatalogView | null {
	const event = db.select({ catalogId: table.gwEvent.catalogId }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!event) return null;
	const meta = db.select({ catalogId: table.eventTargetsMeta.catalogId }).from(table.eventTargetsMeta).where(eq(table.eventTargetsMeta.eventId, eventId)).get();
	const current = event.catalogId ? getCatalog(event.catalogId) : null;
	const ranked = meta && meta.catalogId !== event.catalogId ? (meta.catalogId ? getCatalog(meta.catalogId) : null) : null;
	return {
		catalog: choice(current),
		rankedWith: choice(ranked),
		reranking: Boolean(meta && meta.catalogId !== event.catalogId),
		lastSwitch: lastSwitch(eventId),
		choices: catalogChoices()
	};
}

export interface SwitchPreview {
	eventId: string;
	from: CatalogChoice | null;
	to: CatalogChoice;
	/** Held galaxy claims on galaxies of other catalogues: they will be outside the new ranking. */
	claimsLeftOutside: number;
}

export type SwitchOutcome = { switched: true; preview: SwitchPreview } | { switched: false; needsConfirmation: true; preview: SwitchPreview };

/**
 * Rank an event against another catalogue. A live (active) event is switched only with
 * `confirmed`; without it the answer is the preview to confirm. Throws DomainError for an unknown
 * event, a catalogue that is not ready, or the catalogue the event already uses.
 */
export function switchEventCatalog(user: SessionUser, eventId: string, catalogId: string, o: { confirmed: boolean }): SwitchOutcome {
	const event = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!event) throw new DomainError(404, 'not_found', `No event ${eventId}.`);
	const target = getCatalog(catalogId);
	if (!target) throw new DomainError(404, 'not_found', 'No such catalogue.', { catalogId: 'Choose one of the catalogues listed.' });
	if (target.state !== 'ready')
		throw new DomainError(422, 'catalog_not_ready', `The catalogue "${target.name}" is ${target.state}, not ready: choose a ready one.`, { catalogId: 'Choose a ready catalogue.' });
	if (event.catalogId === catalogId)
		throw new DomainError(409, 'unchanged', `${event.sourceEventId} is already ranked against "${target.name}".`, { catalogId: 'This is the catalogue in use.' });
	const from = event.catalogId ? getCatalog(event.catalogId) : null;
	const preview: SwitchPreview = { eventId, from: choice(from), to: choice(target)!, claimsLeftOutside: claimsOutsideCatalog(eventId, catalogId) };
	if (event.state === 'active' && !o.confirmed) return { switched: false, needsConfirmation: true, preview };

	const updated = db
		.update(table.gwEvent)
		.set({ catalogId, updatedAt: new Date() })
		.where(and(eq(table.gwEvent.id, eventId), event.catalogId === null ? sql`${table.gwEvent.catalogId} IS NULL` : eq(table.gwEvent.catalogId, event.catalogId)))
		.returning({ id: table.gwEvent.id })
		.get();
	if (!updated) throw new DomainError(409, 'changed', 'Someone switched this event’s catalogue meanwhile; reload and look again.');
	const payload = { eventId, fromCatalogId: from?.id ?? null, fromName: from?.name ?? null, toCatalogId: target.id, toName: target.name };
	const actor = actorOf(user);
	record(actor, 'targets.catalog-switched', 'board', payload);
	record(actor, 'targets.catalog-switched', `event:${eventId}`, payload);
	return { switched: true, preview };
}

function claimsOutsideCatalog(eventId: string, catalogId: string): number {
	return (
		db
			.select({ n: sql<number>`count(*)` })
			.from(table.claim)
			.innerJoin(table.galaxy, eq(table.galaxy.id, sql`CAST(${table.claim.targetId} AS INTEGER)`))
			.where(and(eq(table.claim.eventId, eventId), eq(table.claim.targetKind, 'galaxy'), inArray(table.claim.state, HELD), sql`${table.galaxy.catalogId} <> ${catalogId}`))
			.get()?.n ?? 0
	);
}

export interface OutsideClaim {
	id: string;
	targetKind: table.Claim['targetKind'];
	targetId: string;
	/** Galaxy name or field id. */
	label: string;
	/** The galaxy's catalogue (null for a field). */
	catalogName: string | null;
	raDeg: number | null;
	decDeg: number | null;
	state: table.ClaimState;
	filter: string;
	epoch: number;
	teamId: string;
	teamName: string;
	telescopeId: string;
	telescopeName: string;
	claimedAt: string;
}

/**
 * Claims that hold (or finished) a target the event's current ranking does not contain: a galaxy
 * not among its ranked galaxies (another catalogue, or outside a new map's region) or a field not
 * among its ranked fields. Oldest first.
 */
export function claimsOutsideRanking(eventId: string): OutsideClaim[] {
	const rankedGalaxies = db.select({ id: sql<string>`CAST(${table.eventGalaxy.galaxyId} AS TEXT)` }).from(table.eventGalaxy).where(eq(table.eventGalaxy.eventId, eventId));
	const rankedFields = db.select({ id: table.eventField.fieldId }).from(table.eventField).where(eq(table.eventField.eventId, eventId));
	const base = () =>
		db
			.select({ c: table.claim, teamName: table.team.name, telescopeName: table.telescope.name })
			.from(table.claim)
			.innerJoin(table.team, eq(table.team.id, table.claim.teamId))
			.innerJoin(table.telescope, eq(table.telescope.id, table.claim.telescopeId));
	const held = and(eq(table.claim.eventId, eventId), inArray(table.claim.state, HELD));
	const galaxyRows = base()
		.where(and(held, eq(table.claim.targetKind, 'galaxy'), notInArray(table.claim.targetId, rankedGalaxies)))
		.all();
	const fieldRows = base()
		.where(and(held, eq(table.claim.targetKind, 'field'), notInArray(table.claim.targetId, rankedFields)))
		.all();
	const galaxyIds = galaxyRows.map((r) => Number(r.c.targetId)).filter(Number.isSafeInteger);
	const galaxies = new Map(
		(galaxyIds.length
			? db
					.select({ id: table.galaxy.id, name: table.galaxy.name, raDeg: table.galaxy.raDeg, decDeg: table.galaxy.decDeg, catalogName: table.catalog.name })
					.from(table.galaxy)
					.innerJoin(table.catalog, eq(table.catalog.id, table.galaxy.catalogId))
					.where(inArray(table.galaxy.id, galaxyIds))
					.all()
			: []
		).map((g) => [String(g.id), g])
	);
	return [...galaxyRows, ...fieldRows]
		.sort((a, b) => a.c.claimedAt.getTime() - b.c.claimedAt.getTime())
		.map(({ c, teamName, telescopeName }) => {
			const g = c.targetKind === 'galaxy' ? galaxies.get(c.targetId) : undefined;
			return {
				id: c.id,
				targetKind: c.targetKind,
				targetId: c.targetId,
				label: g?.name ?? (c.targetKind === 'galaxy' ? `galaxy ${c.targetId}` : c.targetId),
				catalogName: g?.catalogName ?? null,
				raDeg: g?.raDeg ?? null,
				decDeg: g?.decDeg ?? null,
				state: c.state,
				filter: c.filter,
				epoch: c.epoch,
				teamId: c.teamId,
				teamName,
				telescopeId: c.telescopeId,
				telescopeName,
				claimedAt: c.claimedAt.toISOString()
			};
		});
}

/** Ids of the catalogues events use, with how many events each (for the catalogue list). */
export function eventsPerCatalog(): Map<string, number> {
	const rows = db
		.select({ catalogId: table.gwEvent.catalogId, n: sql<number>`count(*)` })
		.from(table.gwEvent)
		.where(sql`${table.gwEvent.catalogId} IS NOT NULL`)
		.groupBy(table.gwEvent.catalogId)
		.orderBy(asc(table.gwEvent.catalogId))
		.all();
	return new Map(rows.map((r) => [r.catalogId!, r.n]));
}
