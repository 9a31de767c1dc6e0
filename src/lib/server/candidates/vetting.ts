/**
 * Vetting of candidates, stored per candidate and recomputed whenever an input changes: new
 * photometry (photometry.ts calls `vetEvent` after storing), a new sky map for the event
 * (`skymap.analysed`), a new ranking of its galaxies (`targets.ranked`), a new candidate
 * (`candidate.reported`) or new thresholds (`setThresholds`). Each stored vetting carries the key
 * of the inputs it was made from, so a repeat trigger with nothing new changes nothing, and a read
 * of a stale vetting recomputes it.
 *
 * The first time the rules call a candidate kilonova-like, the duty scientist(s) on shift and the
 * coordinators are e-mailed, once: the database decides (`kilonova_like_at` is set by a guarded update).
 */
import { and, asc, count, eq, inArray, max, sql } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { clearSkyMapCache, loadCurrentSkyMap, skyMapById } from '../alerts/skymap-cache';
import { actorOf, onRecorded, record, SYSTEM, type Actor } from '../platform/realtime';
import { restartService } from '../platform/services';
import type { SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import type { SkyMap } from '../../sky/index.ts';
import { problemsByField, thresholdProblems, DEFAULT_KILONOVA_THRESHOLDS, RULES, withDefaults, type KilonovaThresholds, type KilonovaVerdict, type RuleId, type ThresholdChanges } from '../../candidates/rules.ts';
import { lookUpDirections, vetCandidate, type CandidateVetting, type RankedGalaxy } from '../../candidates/vetting.ts';
import type { PhotometryPoint } from '../../candidates/photometry.ts';
import { positionErrText } from '../../candidates/position.ts';
import { CandidateError, fieldErrorsOf } from './candidates';
import { candidateLink, candidateRecipients, mailRecipients } from './notify';
import { eventClassOf } from '../people/notifications';

// ───────────────────────────── Thresholds ─────────────────────────────

const num = (what: string) => z.number({ error: `${what} must be a number` });
const filters = z.array(z.string().trim().min(1).max(20), { error: 'filters must be a list of filter names' }).max(40);

/** A coordinator's changes to the kilonova thresholds: any section in part (see rules.ts for the meaning of each). */
export const thresholdChangesInput = z
	.object({
		decisionSigma: num('the decision sigma').optional(),
		credibleRegion: z.object({ level: num('the credible level') }).partial().strict().optional(),
		hostDistance: z.object({ minPValue: num('the smallest distance p-value') }).partial().strict().optional(),
		fastFade: z.object({ minRateMagPerDay: num('the fade rate'), withinDays: num('the fade window'), filters }).partial().strict().optional(),
		reddening: z
			.object({
				minRateMagPerDay: num('the colour rate'),
				withinDays: num('the colour window'),
				colours: z.array(z.tuple([z.string().trim().min(1).max(20), z.string().trim().min(1).max(20)]), { error: 'colours must be pairs of filter names' }).max(20),
				pairWindowDays: num('the pairing window')
			})
			.partial()
			.strict()
			.optional(),
		peakLuminosity: z
			.object({ brightestMag: num('the brightest absolute magnitude'), faintestMag: num('the faintest absolute magnitude'), filters })
			.partial()
			.strict()
			.optional(),
		verdict: z
			.object({ minRulesMet: num('the number of rules to meet'), needLightCurveRule: z.boolean({ error: 'needLightCurveRule must be true or false' }) })
			.partial()
			.strict()
			.optional()
	})
	.strict();

export interface ThresholdsView {
	/** The thresholds in use: the defaults with the coordinators' changes laid over them. */
	thresholds: KilonovaThresholds;
	/** Only what coordinators changed. */
	changes: ThresholdChanges;
	defaults: KilonovaThresholds;
	/** Each rule in words with its source and whether its numbers differ from the defaults. */
	rules: { id: RuleId; label: string; source: (typeof RULES)[RuleId]['source']; changedFromDefault: boolean }[];
	updatedBy: string | null;
	updatedAt: string | null;
}

function storedRules() {
	return db
		.select({ changes: table.kilonovaRules.changes, updatedAt: table.kilonovaRules.updatedAt, updatedBy: table.user.name })
		.from(table.kilonovaRules)
		.leftJoin(table.user, eq(table.user.id, table.kilonovaRules.updatedBy))
		.where(eq(table.kilonovaRules.id, 1))
		.get();
}

/** The thresholds in use, what coordinators changed, and the rules in words. */
export function currentThresholds(): ThresholdsView {
	const row = storedRules();
	const changes = row?.changes ?? {};
	const thresholds = withDefaults(changes);
	return {
		thresholds,
		changes,
		defaults: DEFAULT_KILONOVA_THRESHOLDS,
		rules: (Object.keys(RULES) as RuleId[]).map((id) => ({
			id,
			label: RULES[id].label(thresholds),
			source: RULES[id].source,
			changedFromDefault: JSON.stringify(RULES[id].thresholds(thresholds)) !== JSON.stringify(RULES[id].thresholds(DEFAULT_KILONOVA_THRESHOLDS))
		})),
		updatedBy: row?.updatedBy ?? null,
		updatedAt: row?.updatedAt.toISOString() ?? null
	};
}

/**
 * Replace the coordinators' changes to the thresholds (`{}` returns to the defaults). Refused as
 * CandidateError 403 without the permission, 422 with every problem named (per value, keyed by its
 * path: `fastFade.minRateMagPerDay`). Logs
 * `kilonova.thresholds-changed` to the board and recomputes the vetting of every candidate of
 * the events not retracted (queued; `vettingIdle()` resolves when done).
 */
export function setThresholds(user: SessionUser, raw: unknown, now = new Date()): ThresholdsView {
	if (!can({ user }, 'kilonova.thresholds')) throw new CandidateError(403, 'forbidden', 'Only coordinators may change the kilonova thresholds.');
	const parsed = thresholdChangesInput.safeParse(raw ?? {});
	if (!parsed.success) {
		const fields = fieldErrorsOf(parsed.error);
		// The keys are the rule names a coordinator edits (fastFade, reddening, …): name them.
		const message = Object.entries(fields).map(([rule, problem]) => `${rule}: ${problem}`).join(' ');
		throw new CandidateError(422, 'invalid', message, fields);
	}
	const changes = parsed.data as ThresholdChanges;
	const problems = thresholdProblems(withDefaults(changes));
	if (problems.length) {
		// Per value too (the form puts each beside its field; the API's details are keyed by the same paths).
		throw new CandidateError(422, 'invalid', `The thresholds cannot be used: ${problems.map((p) => p.message).join('; ')}.`, problemsByField(problems));
	}
	db.insert(table.kilonovaRules)
		.values({ id: 1, changes, updatedBy: user.id, updatedAt: now })
		.onConflictDoUpdate({ target: table.kilonovaRules.id, set: { changes, updatedBy: user.id, updatedAt: now } })
		.run();
	record(actorOf(user), 'kilonova.thresholds-changed', 'board', { changes });
	const events = db
		.selectDistinct({ id: table.candidate.eventId })
		.from(table.candidate)
		.innerJoin(table.gwEvent, eq(table.gwEvent.id, table.candidate.eventId))
		.where(sql`${table.gwEvent.state} <> 'retracted'`)
		.all();
	for (const e of events) enqueue(() => vetEvent(e.id), e.id);
	return currentThresholds();
}

// ───────────────────────────── Inputs ─────────────────────────────

/** Forget cached inputs (tests that rewrite the database in place). Maps live in the shared sky-map cache. */
export function clearVettingCache(): void {
	clearSkyMapCache();
}

interface EventInputs {
	event: table.GwEvent;
	skymapId: string | null;
	map: SkyMap | null;
	skyNote: string | null;
	galaxies: RankedGalaxy[];
	/** Changes whenever the event's map, ranking or the thresholds change. */
	key: string;
	thresholds: KilonovaThresholds;
}

/** What every candidate of an event shares: its map, its ranked galaxies, the thresholds. Cheap: reads no file. */
function eventKey(event: table.GwEvent) {
	const sky = event.latestSkymapId
		? db.select({ id: table.skymap.id, filePath: table.skymap.filePath, error: table.skymap.error }).from(table.skymap).where(eq(table.skymap.id, event.latestSkymapId)).get()
		: undefined;
	const ranked = db.select({ computedAt: table.eventTargetsMeta.computedAt, skymapId: table.eventTargetsMeta.skymapId }).from(table.eventTargetsMeta).where(eq(table.eventTargetsMeta.eventId, event.id)).get();
	const rules = db.select({ updatedAt: table.kilonovaRules.updatedAt }).from(table.kilonovaRules).where(eq(table.kilonovaRules.id, 1)).get();
	const key = [
		sky ? `${sky.id}${sky.error || !sky.filePath ? '!' : ''}` : '-',
		ranked ? `${ranked.skymapId}@${ranked.computedAt.getTime()}` : '-',
		rules?.updatedAt.getTime() ?? '-',
		event.eventTime?.getTime() ?? '-'
	].join('|');
	return { sky, key };
}

function gatherEvent(event: table.GwEvent): EventInputs {
	const { sky, key } = eventKey(event);
	let map: SkyMap | null = null;
	let skyNote: string | null = null;
	if (!sky) skyNote = 'the event has no sky map yet';
	else if (sky.error || !sky.filePath) skyNote = `the event's sky map could not be used${sky.error ? `: ${sky.error}` : ''}`;
	else {
		try {
			map = skyMapById(sky.id);
			if (!map) throw new Error('the stored file is missing');
		} catch (e) {
			skyNote = `the event's sky map could not be read: ${(e as Error).message}`;
		}
	}
	const galaxies: RankedGalaxy[] = db
		.select({
			id: sql<string>`CAST(${table.galaxy.id} AS TEXT)`,
			name: table.galaxy.name,
			raDeg: table.galaxy.raDeg,
			decDeg: table.galaxy.decDeg,
			distanceMpc: table.galaxy.distanceMpc,
			distanceErrMpc: table.galaxy.distanceErrMpc,
			rank: table.eventGalaxy.rank,
			probability: table.eventGalaxy.probability
		})
		.from(table.eventGalaxy)
		.innerJoin(table.galaxy, eq(table.galaxy.id, table.eventGalaxy.galaxyId))
		.where(eq(table.eventGalaxy.eventId, event.id))
		.orderBy(asc(table.eventGalaxy.rank))
		.all();
	return { event, skymapId: map ? sky!.id : null, map, skyNote, galaxies, key, thresholds: currentThresholds().thresholds };
}

/** The photometry of a candidate as points, with the discovery measurement unless a stored row repeats it. */
export function candidatePoints(c: table.Candidate): PhotometryPoint[] {
	const rows = db.select().from(table.candidatePhotometry).where(eq(table.candidatePhotometry.candidateId, c.id)).orderBy(asc(table.candidatePhotometry.observedAt)).all();
	const points: PhotometryPoint[] = rows.map((r) => ({
		time: r.observedAt.toISOString(),
		timeMs: r.observedAt.getTime(),
		filter: r.filter,
		mag: r.mag,
		magErr: r.magErr,
		limitMag: r.limitMag
	}));
	// The discovery magnitude counts as a detection when it has an error; a row within a minute in
	// the same filter is the same measurement reported again.
	const t = c.discoveredAt.getTime();
	if (c.magnitudeErr !== null && c.magnitudeErr > 0 && !points.some((p) => p.filter === c.filter && Math.abs(p.timeMs - t) < 60_000)) {
		points.push({ time: c.discoveredAt.toISOString(), timeMs: t, filter: c.filter, mag: c.magnitude, magErr: c.magnitudeErr, limitMag: null });
		points.sort((a, b) => a.timeMs - b.timeMs);
	}
	return points;
}

function photometryKeys(candidateIds: string[]): Map<string, string> {
	if (candidateIds.length === 0) return new Map();
	const rows = db
		.select({ id: table.candidatePhotometry.candidateId, n: count(), last: max(table.candidatePhotometry.createdAt) })
		.from(table.candidatePhotometry)
		.where(inArray(table.candidatePhotometry.candidateId, candidateIds))
		.groupBy(table.candidatePhotometry.candidateId)
		.all();
	return new Map(rows.map((r) => [r.id, `${r.n}@${r.last instanceof Date ? r.last.getTime() : r.last}`]));
}

// ───────────────────────────── Vetting ─────────────────────────────

export interface VetOutcome {
	candidateId: string;
	verdict: string;
	/** Recomputed now (false: the stored vetting was made from the same inputs). */
	recomputed: boolean;
	/** The rules called it kilonova-like for the first time now. */
	firstKilonovaLike: boolean;
}

/** The comparable part of a vetting (without the time it was made). */
const content = (v: CandidateVetting) => JSON.stringify({ ...v, computedAt: undefined });

/**
 * Vet the candidates of an event (all, or `candidateIds`) whose stored vetting was made from other
 * inputs (every one with `force`). Logs `candidate.vetted` (room `event:{id}`) when a result
 * changed, and on a candidate's first kilonova-like verdict `candidate.kilonova-like` (board and
 * event) and the e-mail. Nothing is done for a retracted event.
 */
export function vetEvent(eventId: string, opts: { candidateIds?: string[]; force?: boolean; now?: Date; actor?: Actor } = {}): VetOutcome[] {
	const event = db.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!event || event.state === 'retracted') return [];
	const candidates = db
		.select()
		.from(table.candidate)
		.where(and(eq(table.candidate.eventId, eventId), opts.candidateIds ? inArray(table.candidate.id, opts.candidateIds) : undefined))
		.all();
	if (candidates.length === 0) return [];
	const { key: eventInputsKey } = eventKey(event);
	const photKeys = photometryKeys(candidates.map((c) => c.id));
	const stored = new Map(
		db
			.select()
			.from(table.candidateVetting)
			.where(inArray(table.candidateVetting.candidateId, candidates.map((c) => c.id)))
			.all()
			.map((r) => [r.candidateId, r])
	);
	const keyOf = (c: table.Candidate) => `${eventInputsKey}|${photKeys.get(c.id) ?? '0'}|${c.discoveredAt.getTime()}`;
	const todo = candidates.filter((c) => opts.force || stored.get(c.id)?.inputsKey !== keyOf(c));
	const outcomes: VetOutcome[] = candidates
		.filter((c) => !todo.includes(c))
		.map((c) => ({ candidateId: c.id, verdict: stored.get(c.id)!.verdict, recomputed: false, firstKilonovaLike: false }));
	if (todo.length === 0) return outcomes;

	const inputs = gatherEvent(event);
	const now = opts.now ?? new Date();
	const lookups = inputs.map ? lookUpDirections(inputs.map, todo) : todo.map(() => null);
	const actor = opts.actor ?? SYSTEM;
	todo.forEach((c, k) => {
		const vetting = vetCandidate({
			candidate: { raDeg: c.raDeg, decDeg: c.decDeg, discoveredAtMs: c.discoveredAt.getTime() },
			mergerTimeMs: event.eventTime?.getTime() ?? null,
			sky: lookups[k],
			skymapId: inputs.skymapId,
			skyNote: inputs.skyNote,
			galaxies: inputs.galaxies,
			photometry: candidatePoints(c),
			thresholds: inputs.thresholds,
			nowMs: now.getTime()
		});
		const before = stored.get(c.id);
		const verdict = vetting.rules.verdict;
		const row = { candidateId: c.id, inputsKey: keyOf(c), vetting, verdict, computedAt: now };
		db.insert(table.candidateVetting)
			.values(row)
			.onConflictDoUpdate({ target: table.candidateVetting.candidateId, set: { inputsKey: row.inputsKey, vetting, verdict, computedAt: now } })
			.run();
		if (!before || content(before.vetting) !== content(vetting)) {
			record(actor, 'candidate.vetted', `event:${event.id}`, {
				candidateId: c.id,
				eventId: event.id,
				name: c.name,
				verdict,
				previousVerdict: before?.verdict ?? null,
				credibleLevel: vetting.sky?.credibleLevel ?? null,
				hostGalaxyId: vetting.hosts.host?.galaxy.id ?? null
			});
		}
		let first = false;
		if (verdict === 'kilonova-like') {
			// The guarded update decides "first": a second process vetting the same candidate finds it set.
			first =
				db
					.update(table.candidateVetting)
					.set({ kilonovaLikeAt: now })
					.where(and(eq(table.candidateVetting.candidateId, c.id), sql`${table.candidateVetting.kilonovaLikeAt} IS NULL`))
					.run().changes === 1;
			if (first) announceKilonovaLike(event, c, vetting, now);
		}
		outcomes.push({ candidateId: c.id, verdict, recomputed: true, firstKilonovaLike: first });
	});
	return outcomes;
}

/** The stored vetting of one candidate, recomputed first when its inputs changed; null for an unknown candidate. */
export function vettingOf(candidateId: string): CandidateVetting | null {
	const c = db.select({ eventId: table.candidate.eventId }).from(table.candidate).where(eq(table.candidate.id, candidateId)).get();
	if (!c) return null;
	vetEvent(c.eventId, { candidateIds: [candidateId] });
	return db.select({ vetting: table.candidateVetting.vetting }).from(table.candidateVetting).where(eq(table.candidateVetting.candidateId, candidateId)).get()?.vetting ?? null;
}

const pct = (x: number) => `${(x * 100).toFixed(x < 0.1 ? 1 : 0)}%`;

let pendingMail: Promise<unknown> = Promise.resolve();

function announceKilonovaLike(event: table.GwEvent, c: table.Candidate, v: CandidateVetting, now: Date): void {
	const payload = {
		candidateId: c.id,
		eventId: event.id,
		name: c.name,
		credibleLevel: v.sky?.credibleLevel ?? null,
		hostGalaxyId: v.hosts.host?.galaxy.id ?? null,
		reasons: v.rules.reasons
	};
	record(SYSTEM, 'candidate.kilonova-like', 'board', payload);
	record(SYSTEM, 'candidate.kilonova-like', `event:${event.id}`, payload);
	const link = candidateLink(event.id, c.name);
	const host = v.hosts.host ? `host ${v.hosts.host.galaxy.name ?? v.hosts.host.galaxy.id}` : 'no host';
	const subject = [`Kilonova-like: ${c.name} in ${event.sourceEventId}`, v.sky ? `${pct(v.sky.credibleLevel)} credible level` : null, host]
		.filter(Boolean)
		.join(' · ');
	pendingMail = pendingMail.then(() =>
		mailRecipients(
			candidateRecipients(now),
			(r) => ({
				subject,
				text: [
					`${r.name},`,
					'',
					`The kilonova rules now call candidate ${c.name} of ${event.sourceEventId} kilonova-like, for the first time:`,
					'',
					...v.rules.reasons.map((x) => `  • ${x}`),
					'',
					`Position: RA ${c.raDeg.toFixed(5)}°, Dec ${c.decDeg.toFixed(5)}°${positionErrText(c.positionErrArcsec)}; discovered ${c.discoveredAt.toISOString()} at ${c.magnitude} mag (${c.filter}).`,
					v.hosts.note,
					'',
					`Candidate page: ${link}`,
					'',
					'The rules flag a candidate for attention; only a spectrum classifies it. Alerts can be retracted.'
				].join('\n')
			}),
			{ eventId: event.id, candidateId: c.id },
			'candidate.kilonova-like',
			eventClassOf(event.classification)
		).catch((e) => console.error(`kilonova-like mail for ${c.id} failed`, e))
	);
}

// ───────────────────────────── Reacting to the log ─────────────────────────────

let queue: Promise<unknown> = Promise.resolve();

function enqueue(job: () => void, eventId?: string): void {
	// Off the recording call stack. The event's map is read on the work pool first (a 100 MB map
	// parsed here would hold every request for seconds); the vetting then finds it in the cache.
	queue = queue.then(async () => {
		if (eventId) await loadCurrentSkyMap(eventId).catch(() => null);
		await new Promise<void>((resolve) =>
			setImmediate(() => {
				try {
					job();
				} catch (e) {
					console.error('candidate vetting failed', e);
				}
				resolve();
			})
		);
	});
}

/** Resolves when every vetting asked for so far has finished and its e-mails were handed over (tests, shutdown). */
export async function vettingIdle(): Promise<void> {
	let seen: Promise<unknown>;
	let mail: Promise<unknown>;
	do {
		seen = queue;
		mail = pendingMail;
		await seen;
		await mail;
	} while (seen !== queue || mail !== pendingMail);
}

/** Start vetting on new maps, rankings and candidates. Installing twice replaces the first. */
export function installVetting(): () => void {
	return restartService('candidate-vetting', () => {
		// Map and ranking are logged to the board and the event's room: react to the board copy only.
		const offs = [
			onRecorded('skymap.analysed', ({ eventId }, m) => {
				if (m.room === 'board') enqueue(() => vetEvent(eventId), eventId);
			}),
			onRecorded('targets.ranked', ({ eventId }, m) => {
				if (m.room === 'board') enqueue(() => vetEvent(eventId), eventId);
			}),
			// Logged to the event's room only.
			onRecorded('candidate.reported', ({ eventId, candidateId }) => enqueue(() => vetEvent(eventId, { candidateIds: [candidateId] }), eventId))
		];
		return {
			stop() {
				for (const off of offs) off();
			}
		};
	});
}

/** What the candidate lists show of each vetting, and how many spectra each candidate has. */
export interface VettingSummary {
	verdict: KilonovaVerdict | null;
	credibleLevel: number | null;
	hostPValue: number | null;
	spectra: number;
}

/**
 * The stored vettings of many candidates, as the lists show them (not recomputed here: the list of
 * one event vets it first, and the log keeps vettings current between). Candidates never vetted
 * have a null verdict.
 */
export function vettingSummaries(candidateIds: readonly string[]): Map<string, VettingSummary> {
	const out = new Map<string, VettingSummary>();
	if (candidateIds.length === 0) return out;
	for (const id of candidateIds) out.set(id, { verdict: null, credibleLevel: null, hostPValue: null, spectra: 0 });
	for (const chunk of chunks(candidateIds, 500)) {
		const rows = db
			.select({ id: table.candidateVetting.candidateId, verdict: table.candidateVetting.verdict, vetting: table.candidateVetting.vetting })
			.from(table.candidateVetting)
			.where(inArray(table.candidateVetting.candidateId, chunk))
			.all();
		for (const r of rows) {
			const s = out.get(r.id)!;
			s.verdict = r.verdict;
			s.credibleLevel = r.vetting.sky?.credibleLevel ?? null;
			s.hostPValue = r.vetting.hosts.host?.distancePValue ?? null;
		}
		const spectra = db
			.select({ id: table.candidateSpectrum.candidateId, n: count() })
			.from(table.candidateSpectrum)
			.where(inArray(table.candidateSpectrum.candidateId, chunk))
			.groupBy(table.candidateSpectrum.candidateId)
			.all();
		for (const r of spectra) out.get(r.id)!.spectra = r.n;
	}
	return out;
}

function chunks<T>(xs: readonly T[], size: number): T[][] {
	const out: T[][] = [];
	for (let i = 0; i < xs.length; i += size) out.push(xs.slice(i, i + size));
	return out;
}
