/**
 * An event's whole history as one time-ordered log: the notices as they reached us (from the
 * notice table, at the inbox's receipt time), the duty pages (the log, plus any page row the log
 * does not name), and every logged action about the event — claims, pointings, candidates and
 * their follow-up, changed settings, retraction, close and reopen. Read-only.
 */
import { and, asc, eq, inArray, or, sql } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { DomainError, InputError } from '../platform/errors';
import { TIMELINE_PAGE_SIZE } from '../../limits.ts';
import { describeAction } from '../../activity.ts';
import { parseTimelineKind, sinceMerger, timelineKindOf, TIMELINE_KINDS, type TimelineKind } from '../../closeout/timeline.ts';
import { formatProbability } from '../../alerts/display.ts';

export interface TimelineEntry {
	/** Stable per entry: `log:{seq}`, `notice:{id}` or `page:{id}`. */
	id: string;
	/** The event-log sequence number, null for entries read from the notice or page tables. */
	seq: number | null;
	at: string;
	/** "+2 h 07 min" after the merger; null without a merger time. */
	sinceMerger: string | null;
	kind: TimelineKind;
	/** The logged action, or `notice.received` / `duty.page-sent` for table rows. */
	action: string;
	title: string;
	detail: string;
	actor: string | null;
	teamId: string | null;
	teamName: string | null;
	/** What the entry concerns: a candidate page, the targets page, the event page's section. */
	href: string | null;
	linkText: string | null;
}

export interface TimelineQuery {
	kinds: TimelineKind[];
	teamId: string | null;
	page: number;
}

export interface Timeline {
	eventId: string;
	sourceEventId: string;
	mergerTime: string | null;
	total: number;
	page: number;
	pageSize: number;
	pages: number;
	/** Entries of every kind and team before filtering, by kind (for the filter's counts). */
	counts: Partial<Record<TimelineKind, number>>;
	teams: { teamId: string; teamName: string }[];
	entries: TimelineEntry[];
}

/**
 * Read `kind` (one or more, comma-separated or repeated), `team` and `page` from a query string.
 * A kind or page that is not one of ours is refused with the reason.
 */
export function parseTimelineQuery(q: URLSearchParams): TimelineQuery {
	const rawKinds = q.getAll('kind').flatMap((k) => k.split(',')).map((k) => k.trim()).filter(Boolean);
	const kinds: TimelineKind[] = [];
	for (const raw of rawKinds) {
		const k = parseTimelineKind(raw);
		if (!k) throw new InputError(`There is no kind of entry called "${raw}". Kinds: ${TIMELINE_KINDS.join(', ')}.`, 'kind');
		if (!kinds.includes(k)) kinds.push(k);
	}
	const rawPage = q.get('page');
	const page = rawPage === null || rawPage === '' ? 1 : Number(rawPage);
	if (!Number.isInteger(page) || page < 1) throw new InputError('The page must be a whole number from 1.', 'page');
	return { kinds, teamId: q.get('team') || null, page };
}

type LogRow = typeof table.eventLog.$inferSelect;
type Payload = Record<string, unknown>;

const str = (p: Payload, k: string): string | null => (typeof p[k] === 'string' ? (p[k] as string) : null);
const num = (p: Payload, k: string): number | null => (typeof p[k] === 'number' ? (p[k] as number) : null);
const list = (p: Payload, k: string): string[] => (Array.isArray(p[k]) ? (p[k] as unknown[]).map(String) : []);
const hhmm = (iso: string | null) => (iso ? `${iso.slice(11, 19)} UTC` : '');
const SOURCE_WORDS: Record<string, string> = { form: 'from the report form', csv: 'from a CSV upload', api: 'through the API' };
const NOTICE_WORDS: Record<string, string> = { preliminary: 'Preliminary', initial: 'Initial', update: 'Update', retraction: 'Retraction' };

/** The event's log rows: its own room, and board rows that name it and are not copies of a room row. */
function logRows(eventId: string): LogRow[] {
	const rows = db
		.select()
		.from(table.eventLog)
		.where(
			or(
				eq(table.eventLog.room, `event:${eventId}`),
				and(eq(table.eventLog.room, 'board'), sql`json_extract(${table.eventLog.payload}, '$.eventId') = ${eventId}`)
			)
		)
		.orderBy(asc(table.eventLog.seq))
		.all();
	// Several actions are logged to both rooms with the same payload: keep the event room's copy.
	const inRoom = new Set(rows.filter((r) => r.room !== 'board').map((r) => `${r.action}|${JSON.stringify(r.payload)}`));
	return rows.filter((r) => r.room !== 'board' || !inRoom.has(`${r.action}|${JSON.stringify(r.payload)}`));
}

/** Everything the timeline shows for one event, in time order (ties in the order they were written). */
function allEntries(eventId: string): { entries: TimelineEntry[]; event: { sourceEventId: string; mergerMs: number | null } } | null {
	const event = db.select({ sourceEventId: table.gwEvent.sourceEventId, eventTime: table.gwEvent.eventTime }).from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
	if (!event) return null;
	const mergerMs = event.eventTime?.getTime() ?? null;
	const rows = logRows(eventId);

	const notices = db
		.select({ n: table.notice, receivedAt: table.noticeInbox.receivedAt })
		.from(table.notice)
		.leftJoin(table.noticeInbox, eq(table.noticeInbox.id, table.notice.inboxId))
		.where(eq(table.notice.eventId, eventId))
		.all();
	const pages = db
		.select({ p: table.dutyPage, name: table.user.name })
		.from(table.dutyPage)
		.innerJoin(table.user, eq(table.user.id, table.dutyPage.userId))
		.where(eq(table.dutyPage.eventId, eventId))
		.all();
	const candidates = db.select({ id: table.candidate.id, name: table.candidate.name, teamId: table.candidate.teamId }).from(table.candidate).where(eq(table.candidate.eventId, eventId)).all();
	const teams = new Map(db.select({ id: table.team.id, name: table.team.name }).from(table.team).all().map((t) => [t.id, t.name]));
	const scopes = new Map(db.select({ id: table.telescope.id, name: table.telescope.name }).from(table.telescope).all().map((t) => [t.id, t.name]));
	const claimGalaxyIds = db
		.select({ targetId: table.claim.targetId })
		.from(table.claim)
		.where(and(eq(table.claim.eventId, eventId), eq(table.claim.targetKind, 'galaxy')))
		.all()
		.map((c) => Number(c.targetId))
		.filter(Number.isInteger);
	const galaxyNames = new Map(
		claimGalaxyIds.length
			? db.select({ id: table.galaxy.id, name: table.galaxy.name }).from(table.galaxy).where(inArray(table.galaxy.id, [...new Set(claimGalaxyIds)])).all().map((g) => [String(g.id), g.name])
			: []
	);
	const candidateById = new Map(candidates.map((c) => [c.id, c]));

	const noticeIds = new Set(notices.map((n) => n.n.id));
	const processed = new Map<string, Payload>();
	const loggedPages = new Set<string>();
	for (const r of rows) {
		const p = r.payload as Payload;
		if (r.action === 'notice.processed' && str(p, 'noticeId')) processed.set(str(p, 'noticeId')!, p);
		if ((r.action === 'duty.paged' || r.action === 'duty.escalated') && str(p, 'noticeId')) loggedPages.add(`${str(p, 'noticeId')}|${num(p, 'level') ?? 0}`);
	}

	const eventPage = `/events/${eventId}`;
	const candidateHref = (name: string) => `/events/${eventId}/candidates/${encodeURIComponent(name)}`;
	const targetLabel = (p: Payload) => {
		const id = str(p, 'targetId') ?? '';
		return str(p, 'targetKind') === 'galaxy' ? `galaxy ${galaxyNames.get(id) ?? id}` : `field ${id}`;
	};
	const withTeam = (teamId: string | null) => ({ teamId, teamName: teamId ? (teams.get(teamId) ?? null) : null });

	type Draft = Omit<TimelineEntry, 'sinceMerger' | 'at'> & { atMs: number; order: number };
	const drafts: Draft[] = [];

	for (const { n, receivedAt } of notices) {
		const at = receivedAt ?? n.createdAt;
		const p = processed.get(n.id);
		const triage = p?.triage as { verdict?: string } | undefined;
		const bits = [`authored ${hhmm(n.authoredAt.toISOString())}`, n.role !== 'observation' ? `role ${n.role}` : null, triage?.verdict ? `triage: ${triage.verdict === 'follow' ? 'follow up' : 'skip'}` : null];
		drafts.push({
			id: `notice:${n.id}`,
			seq: null,
			atMs: at.getTime(),
			order: 0,
			kind: 'notice',
			action: 'notice.received',
			title: `${NOTICE_WORDS[n.kind] ?? n.kind} notice received`,
			detail: bits.filter(Boolean).join(' · '),
			actor: null,
			...withTeam(null),
			href: `${eventPage}#notices-heading`,
			linkText: 'Notices'
		});
	}
	for (const { p, name } of pages) {
		if (loggedPages.has(`${p.noticeId}|${p.level}`)) continue;
		drafts.push({
			id: `page:${p.id}`,
			seq: null,
			atMs: p.sentAt.getTime(),
			order: 0,
			kind: 'page',
			action: 'duty.page-sent',
			title: 'Duty scientist paged',
			detail: `${name}, level ${p.level}${p.acknowledgedAt ? ` · acknowledged ${hhmm(p.acknowledgedAt.toISOString())}` : ''}`,
			actor: null,
			...withTeam(null),
			href: `${eventPage}#pages-heading`,
			linkText: 'Duty pages'
		});
	}

	for (const r of rows) {
		const kind = timelineKindOf(r.action);
		if (!kind) continue;
		const p = r.payload as Payload;
		if (r.action === 'notice.processed' && noticeIds.has(str(p, 'noticeId') ?? '')) continue;
		const candidate = str(p, 'candidateId') ? candidateById.get(str(p, 'candidateId')!) : undefined;
		const candidateName = str(p, 'name') ?? candidate?.name ?? null;
		let detail = '';
		let teamId: string | null = str(p, 'teamId');
		let href: string | null = null;
		let linkText: string | null = null;
		switch (kind) {
			case 'notice':
				detail = `${NOTICE_WORDS[str(p, 'kind') ?? ''] ?? str(p, 'kind') ?? ''} notice`;
				href = `${eventPage}#notices-heading`;
				linkText = 'Notices';
				break;
			case 'sky-map': {
				const summary = p.summary as { area90?: number; distanceMean?: number | null; distanceStd?: number | null } | undefined;
				detail =
					r.action === 'skymap.failed'
						? (str(p, 'error') ?? '')
						: [
								typeof summary?.area90 === 'number' ? `90% of the probability in ${summary.area90.toFixed(0)} deg²` : null,
								typeof summary?.distanceMean === 'number' ? `distance ${summary.distanceMean.toFixed(0)}${typeof summary.distanceStd === 'number' ? ` ± ${summary.distanceStd.toFixed(0)}` : ''} Mpc` : null,
								num(p, 'retried') ? `after ${num(p, 'retried')} download attempts` : null
							]
								.filter(Boolean)
								.join(' · ');
				href = `${eventPage}#sky-heading`;
				linkText = 'Sky';
				break;
			}
			case 'page':
				if (r.action === 'duty.paged') detail = `to ${list(p, 'to').join(', ') || 'nobody'}${p.fallback ? ' (nobody on shift: every duty scientist)' : ''}`;
				else if (r.action === 'duty.escalated') detail = `level ${num(p, 'level')}: from ${list(p, 'from').join(', ')} to ${list(p, 'to').join(', ')}`;
				else if (r.action === 'duty.escalation-exhausted') detail = `unanswered by ${list(p, 'unanswered').join(', ')}`;
				else if (r.action === 'duty.mail-failed') detail = str(p, 'error') ?? '';
				else if (r.action === 'duty.page-delivery')
					detail = `${str(p, 'channel')} to ${str(p, 'name')}: ${str(p, 'status')} (try ${num(p, 'attempts')})${str(p, 'error') ? ` — ${str(p, 'error')}` : ''}`;
				href = `${eventPage}#pages-heading`;
				linkText = 'Duty pages';
				break;
			case 'acknowledgement':
				detail = `by ${str(p, 'by') ?? 'someone'}${num(p, 'latencyS') !== null ? `, ${Math.round(num(p, 'latencyS')!)} s after the notice arrived` : ''}`;
				href = `${eventPage}#pages-heading`;
				linkText = 'Acknowledgement';
				break;
			case 'targets':
				detail = `${num(p, 'galaxies') ?? 0} galaxies, ${num(p, 'fields') ?? 0} fields`;
				href = `/events/${eventId}/targets`;
				linkText = 'Targets';
				break;
			case 'claim': {
				const scope = scopes.get(str(p, 'telescopeId') ?? '') ?? 'a telescope';
				const epoch = (num(p, 'epoch') ?? 1) > 1 ? `, epoch ${num(p, 'epoch')}` : '';
				const filter = str(p, 'filter') ? ` in ${str(p, 'filter')}` : '';
				detail = `${targetLabel(p)}${filter}${epoch} · ${scope}`;
				if (r.action === 'claim.released' && str(p, 'reason')) detail += ` · ${str(p, 'reason')}`;
				if (r.action === 'claim.lapsed') detail += ` · not started within ${num(p, 'lapseMinutes')} min`;
				if (r.action === 'claim.reassigned') detail += ` · from ${teams.get(str(p, 'fromTeamId') ?? '') ?? 'another team'} (${scopes.get(str(p, 'fromTelescopeId') ?? '') ?? 'another telescope'})`;
				if (r.action === 'claim.done' && str(p, 'observationId')) detail += ' · by a reported pointing';
				href = `/events/${eventId}/targets${teamId ? `?team=${encodeURIComponent(teamId)}` : ''}`;
				linkText = 'Targets';
				break;
			}
			case 'pointing':
				if (r.action === 'observation.uploaded') {
					const completed = Array.isArray(p.completed) ? (p.completed as { claimIds?: unknown[] }[]).reduce((n, c) => n + (c.claimIds?.length ?? 0), 0) : 0;
					detail = `${num(p, 'count')} pointings by ${scopes.get(str(p, 'telescopeId') ?? '') ?? 'a telescope'} from ${str(p, 'firstObservedAt')} to ${str(p, 'lastObservedAt')} · ${list(p, 'filters').join(', ')}${completed ? ` · completed ${completed} claim${completed === 1 ? '' : 's'}` : ''} · ${SOURCE_WORDS[str(p, 'source') ?? ''] ?? ''}`;
					href = `${eventPage}#coverage-heading`;
					linkText = 'Coverage';
					break;
				}
				detail = `${scopes.get(str(p, 'telescopeId') ?? '') ?? 'a telescope'} at RA ${num(p, 'raDeg')?.toFixed(2)}°, Dec ${num(p, 'decDeg')?.toFixed(2)}°${str(p, 'fieldId') ? ` (field ${str(p, 'fieldId')})` : ''} · ${str(p, 'filter')} to ${num(p, 'limitingMag')?.toFixed(1)} mag, ${num(p, 'exposureS')} s · ${SOURCE_WORDS[str(p, 'source') ?? ''] ?? ''}`;
				href = `${eventPage}#coverage-heading`;
				linkText = 'Coverage';
				break;
			case 'setting':
				if (r.action === 'claim.settings') detail = `claims lapse after ${num(p, 'lapseMinutes')} min`;
				else if (r.action === 'targets.catalog-switched') detail = `from ${str(p, 'fromName') ?? 'none'} to ${str(p, 'toName')}`;
				href = `/events/${eventId}/targets`;
				linkText = 'Targets';
				break;
			case 'state':
				if (r.action === 'event.created') detail = str(p, 'sourceEventId') ?? '';
				else if (r.action === 'event.retracted') detail = str(p, 'reason') ? `reason: ${str(p, 'reason')}` : 'no reason given';
				else detail = [str(p, 'reason'), str(p, 'note')].filter(Boolean).join(' · ');
				href = eventPage;
				linkText = 'Event';
				break;
			default: {
				// Candidate work: the candidate's own team, and a link to its page.
				teamId = teamId ?? candidate?.teamId ?? null;
				const bits: (string | null)[] = [candidateName];
				if (r.action === 'candidate.reported') bits.push(`${num(p, 'magnitude')?.toFixed(2)} mag in ${str(p, 'filter')}`, `RA ${num(p, 'raDeg')?.toFixed(4)}°, Dec ${num(p, 'decDeg')?.toFixed(4)}°`);
				if (r.action === 'candidate.photometry') bits.push(`${num(p, 'detections')} detection(s), ${num(p, 'upperLimits')} upper limit(s) in ${list(p, 'filters').join(', ')}`);
				if (r.action === 'candidate.vetted') bits.push(`verdict ${str(p, 'verdict')}${str(p, 'previousVerdict') ? ` (was ${str(p, 'previousVerdict')})` : ''}`, num(p, 'credibleLevel') !== null ? `inside the ${formatProbability(num(p, 'credibleLevel')!)} region` : null);
				if (r.action === 'candidate.kilonova-like') bits.push(list(p, 'reasons').join('; ') || null);
				if (r.action === 'candidate.taken') bits.push(str(p, 'note') || null);
				if (r.action === 'candidate.spectrum') bits.push(`${num(p, 'points')} points, ${num(p, 'wavelengthMin')}–${num(p, 'wavelengthMax')}`);
				if (r.action === 'candidate.classified' || r.action === 'candidate.decided') bits.push(str(p, 'summary'));
				if (r.action === 'candidate.mail-failed') bits.push(str(p, 'error'));
				detail = bits.filter(Boolean).join(' · ');
				if (candidateName) {
					href = candidateHref(candidateName);
					linkText = `Candidate ${candidateName}`;
				}
			}
		}
		drafts.push({
			id: `log:${r.seq}`,
			seq: r.seq,
			atMs: r.createdAt.getTime(),
			order: 1,
			kind,
			action: r.action,
			title: describeAction(r.action),
			detail,
			actor: r.actorLabel === 'system' ? null : r.actorLabel,
			...withTeam(teamId),
			href,
			linkText
		});
	}

	drafts.sort((a, b) => a.atMs - b.atMs || a.order - b.order || (a.seq ?? 0) - (b.seq ?? 0) || a.id.localeCompare(b.id));
	const entries = drafts.map(({ atMs, order: _order, ...d }) => ({ ...d, at: new Date(atMs).toISOString(), sinceMerger: sinceMerger(atMs, mergerMs) }));
	return { entries, event: { sourceEventId: event.sourceEventId, mergerMs } };
}

/** One page of an event's timeline, oldest first, filtered by kinds and team; null: no such event. */
export function eventTimeline(eventId: string, query: TimelineQuery = { kinds: [], teamId: null, page: 1 }): Timeline | null {
	const all = allEntries(eventId);
	if (!all) return null;
	const counts: Partial<Record<TimelineKind, number>> = {};
	for (const e of all.entries) counts[e.kind] = (counts[e.kind] ?? 0) + 1;
	const teamMap = new Map<string, string>();
	for (const e of all.entries) if (e.teamId && e.teamName) teamMap.set(e.teamId, e.teamName);
	if (query.teamId && !teamMap.has(query.teamId) && !db.select({ id: table.team.id }).from(table.team).where(eq(table.team.id, query.teamId)).get())
		throw new InputError('There is no such team.', 'team');
	const kept = all.entries.filter((e) => (query.kinds.length === 0 || query.kinds.includes(e.kind)) && (query.teamId === null || e.teamId === query.teamId));
	const pages = Math.max(1, Math.ceil(kept.length / TIMELINE_PAGE_SIZE));
	if (query.page > pages) throw new DomainError(404, 'not_found', `This view has ${pages} page${pages === 1 ? '' : 's'}.`);
	return {
		eventId,
		sourceEventId: all.event.sourceEventId,
		mergerTime: all.event.mergerMs === null ? null : new Date(all.event.mergerMs).toISOString(),
		total: kept.length,
		page: query.page,
		pageSize: TIMELINE_PAGE_SIZE,
		pages,
		counts,
		teams: [...teamMap].map(([teamId, teamName]) => ({ teamId, teamName })).sort((a, b) => a.teamName.localeCompare(b.teamName)),
		entries: kept.slice((query.page - 1) * TIMELINE_PAGE_SIZE, query.page * TIMELINE_PAGE_SIZE)
	};
}
