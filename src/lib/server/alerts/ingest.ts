/**
 * Alert ingestion: the inbox first (raw text as received, its format, unique IVORN), then
 * processing — parse (VOEvent XML or a JSON notice, by the row's format), upsert the event, attach
 * the notice, place it in the event's history by its own authored time, fetch (or take from the
 * notice) and analyse the sky map, apply the triage policy, and tell the board.
 *
 * Every step can be repeated: an inbox row whose processing did not finish is processed again
 * (`retryPending`), and each step first looks for what an earlier attempt already stored. So a
 * crash costs a repeat of the unfinished step, never a lost or doubled notice.
 */
import { createHash } from 'node:crypto';
import { and, asc, eq, isNotNull, isNull, lt, lte } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId } from '../people/auth';
import { record, SYSTEM, type Actor } from '../platform/realtime';
import { fetchSkymap, jsonNoticeLimits, SkymapFetchError, skymapReadError, skymapReadOptions, type SkymapFetchOptions } from './skymap-fetch';
import { keepSkyMap } from './skymap-cache';
import { readStoredFile, saveSkymapFileAsync } from '../platform/storage';
import { policyInput, factsOf } from './triage-policy';
import { catalogInUse } from './events';
import { NoticeWaitError, sniffIvorn, type Notice as ParsedNotice } from '../../alerts/voevent.ts';
import { readNotice } from './streams';
import { detectNoticeFormat, parseJsonNotice, sniffJsonNoticeIvorn, type NoticeFormat } from '../../alerts/notice-json.ts';
import { evaluateTriage } from '../../alerts/triage.ts';
import type { SkyMap } from '../../sky/index.ts';
import { runWork } from '../platform/work-pool';
import { ownedBytes } from '../platform/work-memory.ts';

export type InboxVia = table.NoticeInboxRow['via'];

export interface CommitResult {
	inboxId: number;
	ivorn: string;
	/** The IVORN was already in the inbox: nothing was written. */
	duplicate: boolean;
}

/** Attempts after which a row that keeps failing (not a malformed notice: those fail once) is left for a person. */
export const MAX_ATTEMPTS = 5;

const IVORN_SHAPE = /^ivo:\/\/\S{1,505}$/;

/** Inbox key for a notice whose IVORN cannot be read: its content hash, so a resend dedupes too. */
function syntheticKey(rawXml: string): string {
	return `invalid:sha256:${createHash('sha256').update(rawXml).digest('hex')}`;
}

/**
 * Store the raw notice in the inbox (the ack waits for this). A repeat of a known IVORN writes
 * nothing and returns the existing row. The format is the caller's (a Content-Type, an archive
 * entry's label) or else read from the text's first character; a JSON notice is known by the
 * IVORN its reader gives it (event, alert type, creation time).
 */
export function commitNotice(
	rawXml: string,
	via: InboxVia,
	opts: { uploadedSkymapPath?: string | null; now?: Date; format?: NoticeFormat } = {}
): CommitResult {
	const format = opts.format ?? detectNoticeFormat(rawXml) ?? 'voevent';
	const sniffed = format === 'json' ? sniffJsonNoticeIvorn(rawXml) : sniffIvorn(rawXml);
	const ivorn = sniffed && IVORN_SHAPE.test(sniffed) ? sniffed : syntheticKey(rawXml);
	const inserted = db
		.insert(table.noticeInbox)
		.values({ ivorn, rawXml, format, via, receivedAt: opts.now ?? new Date(), uploadedSkymapPath: opts.uploadedSkymapPath ?? null })
		.onConflictDoNothing({ target: table.noticeInbox.ivorn })
		.returning({ id: table.noticeInbox.id })
		.get();
	if (inserted) return { inboxId: inserted.id, ivorn, duplicate: false };
	const existing = db.select().from(table.noticeInbox).where(eq(table.noticeInbox.ivorn, ivorn)).get()!;
	const refusedEarlier =
		existing.processedAt !== null &&
		existing.error !== null &&
		existing.rawXml !== rawXml &&
		!db.select({ id: table.notice.id }).from(table.notice).where(eq(table.notice.inboxId, existing.id)).get();
	if (refusedEarlier) {
		// A corrected resend of a notice that was refused as malformed: not a repeat, take the new text.
		db.update(table.noticeInbox)
			.set({ rawXml, format, via, receivedAt: opts.now ?? new Date(), processedAt: null, error: null, attempts: 0, uploadedSkymapPath: opts.uploadedSkymapPath ?? null })
			.where(eq(table.noticeInbox.id, existing.id))
			.run();
		return { inboxId: existing.id, ivorn, duplicate: false };
	}
	return { inboxId: existing.id, ivorn, duplicate: true };
}

/**
 * `waiting`: the notice names its event only through packets it cites, none of which is stored yet;
 * it stays in the inbox, unprocessed, with the reason, and is read again when another notice is
 * stored (and with the periodic retry).
 */
export type IngestOutcomeKind = 'event-created' | 'notice-added' | 'event-retracted' | 'rejected' | 'already-processed' | 'waiting';

export interface IngestOutcome {
	outcome: IngestOutcomeKind;
	inboxId: number;
	ivorn: string;
	eventId: string | null;
	noticeId: string | null;
	/** Why the notice was refused, or why its sky map could not be used. */
	error: string | null;
}

export type IngestStage = 'stored' | 'analysed';

export interface IngestOptions {
	actor?: Actor;
	fetch?: SkymapFetchOptions;
	/** Called after each durable step; a throw here behaves like a crash at that point (tests). */
	onStage?: (stage: IngestStage, ids: { eventId: string; noticeId: string }) => void;
	now?: () => Date;
}

/** URL-safe event id from the source's id: lower case, `[a-z0-9_-]`, at most 64 characters. */
export function eventIdFor(sourceEventId: string): string {
	const slug = sourceEventId
		.toLowerCase()
		.replace(/[^a-z0-9_-]+/g, '-')
		.replace(/^-+|-+$/g, '')
		.slice(0, 56);
	return slug || 'event';
}

function uniqueEventId(sourceEventId: string): string {
	const base = eventIdFor(sourceEventId);
	const taken = db.select({ source: table.gwEvent.sourceEventId }).from(table.gwEvent).where(eq(table.gwEvent.id, base)).get();
	if (!taken || taken.source === sourceEventId) return base;
	// Two source ids that differ only in case or punctuation: keep them apart.
	return `${base}-${createHash('sha256').update(sourceEventId).digest('hex').slice(0, 6)}`;
}

const inFlight = new Map<number, Promise<IngestOutcome>>();

/** Process one inbox row (again). Concurrent calls for the same row share one run. */
export function processInbox(inboxId: number, opts: IngestOptions = {}): Promise<IngestOutcome> {
	const running = inFlight.get(inboxId);
	if (running) return running;
	const p = runProcess(inboxId, opts).finally(() => inFlight.delete(inboxId));
	inFlight.set(inboxId, p);
	return p;
}

/** Rows not yet processed (oldest first) — at start and periodically. Returns their outcomes. */
export async function retryPending(opts: IngestOptions = {}): Promise<IngestOutcome[]> {
	const rows = db
		.select({ id: table.noticeInbox.id })
		.from(table.noticeInbox)
		.where(and(isNull(table.noticeInbox.processedAt), lt(table.noticeInbox.attempts, MAX_ATTEMPTS)))
		.orderBy(asc(table.noticeInbox.id))
		.all();
	const out: IngestOutcome[] = [];
	for (const r of rows) {
		if (inFlight.has(r.id)) continue;
		try {
			out.push(await processInbox(r.id, opts));
		} catch (e) {
			console.error(`notice inbox row ${r.id}: processing failed (${(e as Error).message}); will retry`);
		}
	}
	return out;
}

/**
 * Process a refused or failed inbox row again, on a person's request (the notice inbox page):
 * the row is opened again (attempts from zero) and goes through the same steps as a new one.
 * A row whose notice was stored is left as it is and answers 'already-processed'; a row being
 * processed now shares that run. Returns undefined when there is no such row.
 */
export async function reprocessNotice(inboxId: number, opts: IngestOptions = {}): Promise<IngestOutcome | undefined> {
	const row = db.select().from(table.noticeInbox).where(eq(table.noticeInbox.id, inboxId)).get();
	if (!row) return undefined;
	const running = inFlight.get(inboxId);
	if (running) return running;
	const stored = db.select({ id: table.notice.id }).from(table.notice).where(eq(table.notice.inboxId, inboxId)).get();
	if (!stored) db.update(table.noticeInbox).set({ processedAt: null, error: null, attempts: 0 }).where(eq(table.noticeInbox.id, inboxId)).run();
	return processInbox(inboxId, opts);
}

function rooms(eventId: string) {
	return ['board', `event:${eventId}`] as const;
}

async function runProcess(inboxId: number, opts: IngestOptions): Promise<IngestOutcome> {
	const actor = opts.actor ?? SYSTEM;
	const now = opts.now ?? (() => new Date());
	const row = db.select().from(table.noticeInbox).where(eq(table.noticeInbox.id, inboxId)).get();
	if (!row) throw new Error(`no inbox row ${inboxId}`);
	if (row.processedAt) {
		const n = db.select({ id: table.notice.id, eventId: table.notice.eventId }).from(table.notice).where(eq(table.notice.inboxId, inboxId)).get();
		return { outcome: n ? 'already-processed' : 'rejected', inboxId, ivorn: row.ivorn, eventId: n?.eventId ?? null, noticeId: n?.id ?? null, error: row.error };
	}
	db.update(table.noticeInbox).set({ attempts: row.attempts + 1 }).where(eq(table.noticeInbox.id, inboxId)).run();

	let parsed: ParsedNotice;
	let embeddedSkymap: Uint8Array | null = null;
	try {
		if (row.format === 'json') ({ notice: parsed, embeddedSkymap } = parseJsonNotice(row.rawXml, jsonNoticeLimits()));
		else parsed = readNotice(row.rawXml).notice;
	} catch (e) {
		if (e instanceof NoticeWaitError) {
			// Out of order: kept, unprocessed, with the reason; read again once a cited packet is stored.
			db.update(table.noticeInbox).set({ error: e.message }).where(eq(table.noticeInbox.id, inboxId)).run();
			return { outcome: 'waiting', inboxId, ivorn: row.ivorn, eventId: null, noticeId: null, error: e.message };
		}
		// A malformed notice will not get better by retrying: it is finished, with its reason kept.
		const error = (e as Error).message;
		db.update(table.noticeInbox).set({ processedAt: now(), error }).where(eq(table.noticeInbox.id, inboxId)).run();
		record(actor, 'notice.rejected', 'board', { inboxId, ivorn: row.ivorn, error });
		return { outcome: 'rejected', inboxId, ivorn: row.ivorn, eventId: null, noticeId: null, error };
	}

	const stored = storeNotice(parsed, inboxId);
	if (stored.eventCreated) record(actor, 'event.created', 'board', { eventId: stored.eventId, sourceEventId: parsed.sourceEventId });
	if (stored.becameRetracted) {
		const reason = parsed.kind === 'retraction' ? (parsed.reason ?? null) : null;
		// Claims are released, and their teams told, by coordination/claims.ts reacting to this message.
		const retracted = { eventId: stored.eventId, noticeId: stored.retractionNoticeId, reason };
		for (const room of rooms(stored.eventId)) record(actor, 'event.retracted', room, retracted);
	}
	opts.onStage?.('stored', { eventId: stored.eventId, noticeId: stored.noticeId });

	const sky = await attachSkymap(stored.eventId, stored.noticeId, parsed, { uploadedPath: row.uploadedSkymapPath, embedded: embeddedSkymap }, opts.fetch);
	opts.onStage?.('analysed', { eventId: stored.eventId, noticeId: stored.noticeId });

	const event = db.transaction((tx) => {
		refreshEvent(tx, stored.eventId);
		tx.update(table.noticeInbox)
			.set({ processedAt: now(), error: sky?.error ? `sky map: ${sky.error}` : null })
			.where(eq(table.noticeInbox.id, inboxId))
			.run();
		return tx.select().from(table.gwEvent).where(eq(table.gwEvent.id, stored.eventId)).get()!;
	});

	if (sky) {
		for (const room of rooms(stored.eventId)) {
			if (sky.error) record(actor, 'skymap.failed', room, { eventId: stored.eventId, noticeId: stored.noticeId, error: sky.error });
			// A row without an error always has its summary (`analyse`).
			else if (sky.summary) record(actor, 'skymap.analysed', room, { eventId: stored.eventId, skymapId: sky.skymapId, noticeId: stored.noticeId, summary: sky.summary });
		}
	}
	const triage = event.triage ?? { verdict: 'skip' as const, reasons: [] };
	const significant = triage.verdict === 'follow' && parsed.kind !== 'retraction' && parsed.role === 'observation';
	const payload = {
		eventId: stored.eventId,
		noticeId: stored.noticeId,
		ivorn: parsed.ivorn,
		kind: parsed.kind,
		role: parsed.role,
		significant,
		triage,
		latest: event.latestNoticeId === stored.noticeId
	};
	for (const room of rooms(stored.eventId)) record(actor, 'notice.processed', room, payload);
	await processWaiting(opts);

	const outcome: IngestOutcomeKind = parsed.kind === 'retraction' ? 'event-retracted' : stored.eventCreated ? 'event-created' : 'notice-added';
	return { outcome, inboxId, ivorn: row.ivorn, eventId: stored.eventId, noticeId: stored.noticeId, error: sky?.error ?? null };
}

let drainingWaiting = false;
let waitingAgain = false;

/**
 * Read again the inbox rows that wait for a cited packet (unprocessed, with a reason), after a
 * notice was stored: one of them may name their event now. Runs once at a time; a call made
 * while it runs asks it for one more pass. A row being processed elsewhere is skipped.
 */
async function processWaiting(opts: IngestOptions): Promise<void> {
	if (drainingWaiting) {
		waitingAgain = true;
		return;
	}
	drainingWaiting = true;
	try {
		do {
			waitingAgain = false;
			const rows = db
				.select({ id: table.noticeInbox.id })
				.from(table.noticeInbox)
				.where(and(isNull(table.noticeInbox.processedAt), isNotNull(table.noticeInbox.error)))
				.orderBy(asc(table.noticeInbox.id))
				.all();
			for (const r of rows) {
				if (inFlight.has(r.id)) continue;
				try {
					await processInbox(r.id, opts);
				} catch (e) {
					console.error(`notice inbox row ${r.id}: processing failed (${(e as Error).message}); will retry`);
				}
			}
		} while (waitingAgain);
	} finally {
		drainingWaiting = false;
	}
}

interface Stored {
	eventId: string;
	noticeId: string;
	eventCreated: boolean;
	becameRetracted: boolean;
	retractionNoticeId: string | null;
}

/** Upsert the event and attach the notice, in one transaction; repeatable. */
function storeNotice(n: ParsedNotice, inboxId: number): Stored {
	return db.transaction((tx) => {
		const existingNotice = tx.select().from(table.notice).where(eq(table.notice.ivorn, n.ivorn)).get();
		let event = tx.select().from(table.gwEvent).where(eq(table.gwEvent.sourceEventId, n.sourceEventId)).get();
		let eventCreated = false;
		if (!event) {
			event = tx
				.insert(table.gwEvent)
				// Ranked against the catalogue in use as it arrives, whatever is imported later (rankings.ts).
				.values({ id: uniqueEventId(n.sourceEventId), sourceEventId: n.sourceEventId, role: n.role, state: 'active', catalogId: catalogInUse() })
				.returning()
				.get();
			eventCreated = true;
		}
		const retractedBefore = event.retractedAt !== null;
		let noticeId: string;
		if (existingNotice) {
			noticeId = existingNotice.id;
			if (existingNotice.inboxId === null) tx.update(table.notice).set({ inboxId }).where(eq(table.notice.id, noticeId)).run();
		} else {
			noticeId = randomId();
			tx.insert(table.notice)
				.values({
					id: noticeId,
					eventId: event.id,
					inboxId,
					ivorn: n.ivorn,
					kind: n.kind,
					role: n.role,
					authoredAt: new Date(n.authoredAt),
					farHz: n.far,
					classification: n.classification,
					properties: n.properties,
					skymapUrl: n.skymapUrl,
					citations: n.citations,
					supersedesIvorn: n.citations.find((c) => c.cite === 'supersedes')?.ivorn ?? null,
					parsed: n as unknown as Record<string, unknown>
				})
				.run();
		}
		const after = refreshEvent(tx, event.id);
		return {
			eventId: event.id,
			noticeId,
			eventCreated,
			// A closed event stays closed, but its teams still hear of the retraction.
			becameRetracted: !retractedBefore && after.retractionNoticeId !== null,
			retractionNoticeId: after.retractionNoticeId
		};
	});
}

type Tx = Parameters<Parameters<typeof db.transaction>[0]>[0];

/**
 * Recompute what the event shows from all its notices: the content of the latest notice by its
 * own authored time (not arrival order), retracted if any retraction exists (whatever its time),
 * the sky map of the latest notice that has an analysed one, and the triage verdict.
 */
function refreshEvent(tx: Tx, eventId: string): { state: table.GwEvent['state']; retractionNoticeId: string | null } {
	const event = tx.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get()!;
	const notices = tx.select().from(table.notice).where(eq(table.notice.eventId, eventId)).orderBy(asc(table.notice.authoredAt), asc(table.notice.createdAt)).all();
	const latest = notices.at(-1) ?? null;
	// A follow-up is a new, independent measurement (VOEvent 2.0 §3.7.1): it does not replace what the
	// event shows, unless the event has nothing else; its sky map counts like any other (below).
	const content = notices.filter((x) => x.kind !== 'retraction' && x.kind !== 'followup').at(-1) ?? notices.filter((x) => x.kind === 'followup').at(-1) ?? null;
	const retraction = notices.find((x) => x.kind === 'retraction') ?? null;
	const maps = tx
		.select({ id: table.skymap.id, summary: table.skymap.summary, authoredAt: table.notice.authoredAt })
		.from(table.skymap)
		.innerJoin(table.notice, eq(table.skymap.noticeId, table.notice.id))
		.where(and(eq(table.skymap.eventId, eventId), isNull(table.skymap.error)))
		.orderBy(asc(table.notice.authoredAt), asc(table.skymap.createdAt))
		.all();
	const map = maps.at(-1) ?? null;
	// A coordinator's close stands whatever arrives; reopening it finds 'retracted' again (closeout/close.ts).
	const state: table.GwEvent['state'] = event.state === 'closed' ? 'closed' : retraction ? 'retracted' : 'active';
	const eventTime = (content?.parsed as { eventTime?: string | null } | undefined)?.eventTime;
	const next = {
		state,
		role: (content ?? latest)?.role ?? event.role,
		eventTime: eventTime ? new Date(eventTime) : null,
		latestNoticeId: latest?.id ?? null,
		latestKind: latest?.kind ?? null,
		farHz: content?.farHz ?? null,
		classification: content?.classification ?? null,
		properties: content?.properties ?? null,
		latestSkymapId: map?.id ?? null,
		retractedAt: retraction ? (event.retractedAt ?? retraction.authoredAt) : null,
		updatedAt: new Date()
	};
	const triage = evaluateTriage(policyInput(), factsOf({ ...event, ...next }, map?.summary ?? null));
	tx.update(table.gwEvent).set({ ...next, triage }).where(eq(table.gwEvent.id, eventId)).run();
	return { state, retractionNoticeId: retraction?.id ?? null };
}

interface SkyResult {
	skymapId: string;
	summary: table.SkymapSummary | null;
	error: string | null;
}

/**
 * Fetch (or read the uploaded file, or take the map the notice carries), analyse and store the
 * notice's sky map; reuse an earlier attempt's row. An uploaded file wins over an embedded map,
 * and either over a URL. An embedded map is stored and analysed exactly like a fetched one.
 */
async function attachSkymap(
	eventId: string,
	noticeId: string,
	n: ParsedNotice,
	given: { uploadedPath: string | null; embedded: Uint8Array | null },
	fetchOpts: SkymapFetchOptions | undefined
): Promise<SkyResult | null> {
	const { uploadedPath, embedded } = given;
	const local = uploadedPath !== null || embedded !== null;
	if (n.kind === 'retraction' && !local) return null;
	if (!local && !n.skymapUrl) return null;
	const earlier = db.select().from(table.skymap).where(eq(table.skymap.noticeId, noticeId)).get();
	if (earlier) return { skymapId: earlier.id, summary: earlier.summary, error: earlier.error };

	const sourceUrl = local ? null : n.skymapUrl;
	let bytes: Buffer;
	try {
		if (uploadedPath) bytes = readStoredFile(uploadedPath);
		else if (embedded) bytes = Buffer.from(embedded.buffer, embedded.byteOffset, embedded.byteLength);
		else bytes = (await fetchSkymap(n.skymapUrl!, fetchOpts)).bytes;
	} catch (e) {
		const error = e instanceof SkymapFetchError ? e.message : `could not read the sky map: ${(e as Error).message}`;
		const retry = !local && isTransient(e) ? { fetchAttempts: 1, retryAt: retryTime(1, new Date()) } : { fetchAttempts: local ? 0 : 1 };
		return insertSkymap({ eventId, noticeId, sourceUrl, error: retry.retryAt ? `${error} (will try again)` : error, ...retry });
	}
	const analysis = await analyse(eventId, noticeId, bytes);
	const result = insertSkymap({ eventId, noticeId, sourceUrl, fetchAttempts: local ? 0 : 1, ...analysis.columns });
	if (analysis.map) keepSkyMap(result.skymapId, analysis.map);
	return result;
}

type Analysis =
	| { map: SkyMap; summary: table.SkymapSummary; columns: Partial<typeof table.skymap.$inferInsert> }
	| { map: null; error: string; columns: Partial<typeof table.skymap.$inferInsert> };

/**
 * Analyse fetched bytes into the sky-map row's columns (or the reason they could not be), keeping
 * the parsed map. Reading, analysing and drawing run on the work pool; the bytes move there and
 * back rather than being copied.
 */
async function analyse(eventId: string, noticeId: string, given: Buffer): Promise<Analysis> {
	const bytes = ownedBytes(given);
	let analysed: Awaited<ReturnType<typeof runWork<'analyseSkymap'>>>;
	try {
		analysed = await runWork('analyseSkymap', { bytes, read: skymapReadOptions(), raster: { width: 360, height: 180 } }, { transfer: [bytes.buffer] });
	} catch (e) {
		const error = `the sky map could not be analysed: ${skymapReadError(e)}`;
		return { map: null, error, columns: { error, retryAt: null } };
	}
	const { map, summary } = analysed;
	const display = analysed.display as unknown as Record<string, unknown>;
	const back = analysed.bytes;
	const file = await saveSkymapFileAsync(eventId, noticeId, back, analysed.sha256);
	return { map, summary, columns: { summary, display, filePath: file.path, bytes: file.bytes, sha256: file.sha256, error: null, retryAt: null } };
}

// ── Sky maps whose download failed for a passing reason ──

/** Downloads tried at most this many times in all. */
export const MAX_SKYMAP_FETCHES = 5;
/** Wait before the next try: 1, 2, 4, 8 minutes (the map host may be slow to publish or briefly down). */
export function retryTime(attemptsSoFar: number, now: Date): Date {
	return new Date(now.getTime() + 60_000 * 2 ** (attemptsSoFar - 1));
}

/** A timeout, a network error or an HTTP error may pass; a refused host, a redirect or an oversize file will not. */
function isTransient(e: unknown): boolean {
	return e instanceof SkymapFetchError && (e.code === 'timeout' || e.code === 'network' || e.code === 'http_status');
}

/**
 * Try again the downloads that failed for a passing reason and are due. A map that now arrives is
 * analysed and stored in the same row, the event is recomputed (it shows the map if its notice is
 * still the latest with one) and `skymap.analysed` goes out as for a first-time map, so targets are
 * re-ranked and every page updates. Returns the sky-map ids that were tried.
 */
export async function retrySkymaps(opts: IngestOptions = {}): Promise<string[]> {
	const now = opts.now?.() ?? new Date();
	const actor = opts.actor ?? SYSTEM;
	const due = db
		.select()
		.from(table.skymap)
		.where(and(isNotNull(table.skymap.retryAt), lte(table.skymap.retryAt, now)))
		.all();
	const tried: string[] = [];
	for (const row of due) {
		if (!row.sourceUrl) continue;
		tried.push(row.id);
		const attempts = row.fetchAttempts + 1;
		let bytes: Buffer;
		try {
			bytes = (await fetchSkymap(row.sourceUrl, opts.fetch)).bytes;
		} catch (e) {
			const error = e instanceof SkymapFetchError ? e.message : `could not read the sky map: ${(e as Error).message}`;
			const again = isTransient(e) && attempts < MAX_SKYMAP_FETCHES;
			db.update(table.skymap)
				.set({ fetchAttempts: attempts, retryAt: again ? retryTime(attempts, now) : null, error: again ? `${error} (will try again)` : `${error} (gave up after ${attempts} attempts)` })
				.where(eq(table.skymap.id, row.id))
				.run();
			continue;
		}
		const analysis = await analyse(row.eventId, row.noticeId, bytes);
		db.transaction((tx) => {
			tx.update(table.skymap).set({ ...analysis.columns, fetchAttempts: attempts }).where(eq(table.skymap.id, row.id)).run();
			refreshEvent(tx, row.eventId);
		});
		if (analysis.map) keepSkyMap(row.id, analysis.map);
		for (const room of rooms(row.eventId)) {
			if (analysis.map === null) record(actor, 'skymap.failed', room, { eventId: row.eventId, noticeId: row.noticeId, error: analysis.error });
			else record(actor, 'skymap.analysed', room, { eventId: row.eventId, skymapId: row.id, noticeId: row.noticeId, summary: analysis.summary, retried: attempts });
		}
	}
	return tried;
}

function insertSkymap(v: Omit<typeof table.skymap.$inferInsert, 'id'>): SkyResult {
	const id = randomId();
	// Not `.returning()`: reading the row back parsed its display raster's JSON again for nothing.
	db.insert(table.skymap)
		.values({ id, ...v })
		.run();
	return { skymapId: id, summary: v.summary ?? null, error: v.error ?? null };
}
