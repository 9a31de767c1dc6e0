/**
 * The archive: closed events, found by merger date, most probable source class, 90% area, why they
 * were closed and which teams worked them (claimed a target or reported a pointing), a page at a time.
 */
import { z } from 'zod';
import { listEvents } from '../alerts/events';
import { teamsByEvent } from '../coordination/team-work';
import { listTeams } from '../people/teams';
import { dominantClass, SOURCE_CLASSES, type SourceClass } from '../../alerts/display.ts';
import { CLOSE_REASONS, type CloseReason, type ClosureView } from '../../event-view.ts';
import { ARCHIVE_PAGE_SIZE } from '../../limits.ts';
import '../../field-messages';

/** The most closed events the archive searches (newest first). */
const ARCHIVE_SCAN_LIMIT = 5000;

/** Whether a YYYY-MM-DD is a day of the calendar (JavaScript's parser rolls 2026-02-30 over to 2 March). */
function realDay(s: string): boolean {
	const t = Date.parse(`${s}T00:00:00Z`);
	return !Number.isNaN(t) && new Date(t).toISOString().slice(0, 10) === s;
}

const day = z.string().trim().regex(/^\d{4}-\d{2}-\d{2}$/, 'Give the date as YYYY-MM-DD.').refine(realDay, 'That date does not exist.');
const area = z.coerce.number({ error: 'Give the area as a number of square degrees.' }).min(0, 'The area cannot be negative.').max(41_253, 'The whole sky is 41 253 deg².');

/** The archive's filters as the page's query string gives them ('' = not set). Each refused value is named; the others still apply. */
export const archiveFilterFields = {
	from: day,
	to: day,
	sourceClass: z.enum(SOURCE_CLASSES, { error: `Source class must be one of ${SOURCE_CLASSES.join(', ')}.` }),
	areaMin: area,
	areaMax: area,
	outcome: z.enum(CLOSE_REASONS, { error: 'Choose one of the listed outcomes.' }),
	teamId: z.string().trim().min(1).max(80),
	page: z.coerce.number({ error: 'Page must be a whole number.' }).int('Page must be a whole number.').min(1, 'Pages start at 1.')
} as const;

export type ArchiveFilterName = keyof typeof archiveFilterFields;

export interface ArchiveFilters {
	from?: string;
	to?: string;
	sourceClass?: SourceClass;
	areaMin?: number;
	areaMax?: number;
	outcome?: CloseReason;
	teamId?: string;
	page?: number;
}

/** Read the filters from a query string: `{ filters, errors }`, a refused value left out of `filters` with its message in `errors`. */
export function readArchiveFilters(params: URLSearchParams): { filters: ArchiveFilters; errors: Partial<Record<ArchiveFilterName, string>> } {
	const filters: Record<string, unknown> = {};
	const errors: Partial<Record<ArchiveFilterName, string>> = {};
	for (const [name, schema] of Object.entries(archiveFilterFields) as [ArchiveFilterName, z.ZodType][]) {
		const raw = params.get(name)?.trim();
		if (!raw) continue;
		const parsed = schema.safeParse(raw);
		if (parsed.success) filters[name] = parsed.data;
		else errors[name] = parsed.error.issues[0].message;
	}
	const f = filters as ArchiveFilters;
	if (f.from && f.to && f.from > f.to) errors.to = 'The end date is before the start date.';
	if (f.areaMin !== undefined && f.areaMax !== undefined && f.areaMin > f.areaMax) errors.areaMax = 'The largest area is smaller than the smallest.';
	if (errors.to) delete f.to;
	if (errors.areaMax) delete f.areaMax;
	return { filters: f, errors };
}

export interface ArchiveRow {
	eventId: string;
	sourceEventId: string;
	eventTime: string | null;
	role: string;
	sourceClass: { name: SourceClass; probability: number } | null;
	area90Deg2: number | null;
	closure: ClosureView;
	teams: { id: string; name: string }[];
}

export interface ArchivePage {
	rows: ArchiveRow[];
	/** Closed events matching the filters. */
	total: number;
	page: number;
	pages: number;
	pageSize: number;
	/** Every team, for the team filter. */
	teams: { id: string; name: string }[];
}

const DAY_MS = 86_400_000;

/** Closed events matching `filters`, newest merger first (events without a merger time by arrival), one page. */
export function archive(filters: ArchiveFilters = {}, pageSize = ARCHIVE_PAGE_SIZE): ArchivePage {
	const closed = listEvents({ state: 'closed', limit: ARCHIVE_SCAN_LIMIT });
	const teams = teamsByEvent(closed.map((e) => e.eventId));
	const fromMs = filters.from ? Date.parse(`${filters.from}T00:00:00Z`) : null;
	// The end date is inclusive: mergers up to the end of that UTC day.
	const toMs = filters.to ? Date.parse(`${filters.to}T00:00:00Z`) + DAY_MS : null;
	const all = closed
		.filter((e) => e.closure)
		.map(
			(e): ArchiveRow => ({
				eventId: e.eventId,
				sourceEventId: e.sourceEventId,
				eventTime: e.eventTime,
				role: e.role,
				sourceClass: dominantClass(e.classification),
				area90Deg2: e.skymap?.area90 ?? null,
				closure: e.closure!,
				teams: teams.get(e.eventId) ?? []
			})
		)
		.filter((r) => {
			const t = r.eventTime ? Date.parse(r.eventTime) : null;
			if (fromMs !== null && (t === null || t < fromMs)) return false;
			if (toMs !== null && (t === null || t >= toMs)) return false;
			if (filters.sourceClass && r.sourceClass?.name !== filters.sourceClass) return false;
			if (filters.areaMin !== undefined && (r.area90Deg2 === null || r.area90Deg2 < filters.areaMin)) return false;
			if (filters.areaMax !== undefined && (r.area90Deg2 === null || r.area90Deg2 > filters.areaMax)) return false;
			if (filters.outcome && r.closure.reason !== filters.outcome) return false;
			if (filters.teamId && !r.teams.some((x) => x.id === filters.teamId)) return false;
			return true;
		});
	const order = (r: ArchiveRow, createdAt: string) => Date.parse(r.eventTime ?? createdAt);
	const created = new Map(closed.map((e) => [e.eventId, e.createdAt]));
	all.sort((a, b) => order(b, created.get(b.eventId)!) - order(a, created.get(a.eventId)!) || b.closure.at.localeCompare(a.closure.at));
	const pages = Math.max(1, Math.ceil(all.length / pageSize));
	const page = Math.min(filters.page ?? 1, pages);
	return {
		rows: all.slice((page - 1) * pageSize, page * pageSize),
		total: all.length,
		page,
		pages,
		pageSize,
		teams: listTeams().map((t) => ({ id: t.id, name: t.name }))
	};
}
