/**
 * Filters of the ranked target tables ("observable now", unclaimed, by team) and the data of the
 * targets page, built so that 10⁴ stored galaxies filter, sort and page within a request.
 * "Observable now" is the one-instant test of `lib/targeting/visibility.ts` (`observableNowMask`)
 * over every stored row; the full `visibility()` runs for the rows of the page only.
 */
import type { SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { actsForEveryTeam, usableTelescopes } from '../people/scope';
import * as claims from '../coordination/claims';
import { getEvent } from '../alerts/events';
import { listTelescopes } from '../people/telescopes';
import { eventFieldsPage, eventGalaxies, FIELD_SORTS, GALAXY_SORTS, targetsMeta, type FieldSort, type GalaxySort, type TargetFilter } from './rankings';
import { telescopeViews } from './visibility-view';
import { observableNowMask, skyNow, tonightFor, visibility } from '../../targeting/visibility.ts';

/** Rows per page in both tables. */
import { TARGETS_PAGE_SIZE as PAGE_SIZE } from '../../limits.ts';

// ─── The query string ───

export interface TargetQuery {
	observableNow: boolean;
	unclaimed: boolean;
	teamId: string | null;
	telescopeId: string | null;
	galaxies: { page: number; sort: GalaxySort; dir: 'asc' | 'desc' };
	fields: { page: number; sort: FieldSort; dir: 'asc' | 'desc' };
}

const pageOf = (v: string | null) => Math.max(1, Math.floor(Number(v)) || 1);
const pick = <T extends string>(allowed: readonly T[], v: string | null, fallback: T): T => ((allowed as readonly string[]).includes(v ?? '') ? (v as T) : fallback);

/**
 * Filters and paging from the page's query string: `observable=now`, `claim=unclaimed`,
 * `team=ID`, `telescope=ID`; galaxies `page`/`sort`/`dir`, fields `fpage`/`fsort`/`fdir`.
 * Unknown values are ignored, so an edited link still shows a page.
 */
export function parseTargetQuery(q: URLSearchParams): TargetQuery {
	return {
		observableNow: q.get('observable') === 'now',
		unclaimed: q.get('claim') === 'unclaimed',
		teamId: q.get('team') || null,
		telescopeId: q.get('telescope') || null,
		galaxies: { page: pageOf(q.get('page')), sort: pick(GALAXY_SORTS, q.get('sort'), 'rank'), dir: q.get('dir') === 'desc' ? 'desc' : 'asc' },
		fields: { page: pageOf(q.get('fpage')), sort: pick(FIELD_SORTS, q.get('fsort'), 'rank'), dir: q.get('fdir') === 'desc' ? 'desc' : 'asc' }
	};
}

// ─── The page ───

const paging = (page: number, total: number, sort: string, dir: string) => ({ page, pageSize: PAGE_SIZE, total, pages: Math.max(1, Math.ceil(total / PAGE_SIZE)), sort, dir });

/**
 * Everything the targets page shows, for one person at one instant (the body of its load
 * function, kept here so it can be timed and tested without SvelteKit). Null: no such event.
 */
export function targetsPageData(eventId: string, query: TargetQuery, user: SessionUser | null, now = new Date()) {
	const event = getEvent(eventId);
	if (!event) return null;
	const meta = targetsMeta(event.eventId);
	const telescopes = listTelescopes();
	const summary = event.skymap ? { distanceMean: event.skymap.distanceMean, distanceStd: event.skymap.distanceStd } : null;
	const views = telescopeViews(telescopes, summary, meta?.fieldCounts ?? {}, now);

	// Visibility is for one telescope at a time (its site, limits and tonight).
	const chosen = telescopes.find((t) => t.id === query.telescopeId) ?? telescopes.find((t) => views.find((v) => v.id === t.id)?.kind === 'galaxies') ?? telescopes[0] ?? null;
	const chosenView = chosen ? views.find((v) => v.id === chosen.id)! : null;
	const night = chosen ? tonightFor(chosen, now) : null;
	const sky = chosen ? skyNow(chosen, night, now) : null;
	const see = (target: { ra: number; dec: number }) => (chosen && night ? visibility(chosen, night, { raDeg: target.ra, decDeg: target.dec }, now) : null);

	const teams = [...new Map(telescopes.map((t) => [t.teamId, { id: t.teamId, name: t.teamName }])).values()].sort((a, b) => a.name.localeCompare(b.name));
	const team = teams.find((t) => t.id === query.teamId) ?? null;
	const filter: TargetFilter = {
		unclaimed: query.unclaimed,
		teamId: team?.id ?? null,
		sky: query.observableNow && sky ? (ra, dec) => observableNowMask(sky, ra, dec) : null
	};
	const active = query.observableNow || query.unclaimed || team !== null;

	const g = query.galaxies;
	const galaxyPage = eventGalaxies(event.eventId, { sort: g.sort, dir: g.dir, offset: (g.page - 1) * PAGE_SIZE, limit: PAGE_SIZE, filter });
	const showGalaxyVisibility = chosenView?.kind === 'galaxies' || query.observableNow;
	const galaxyRows = galaxyPage.galaxies.map((r) => ({ ...r, visibility: showGalaxyVisibility ? see(r) : null }));

	const fq = query.fields;
	const fieldPage = chosen && chosenView?.kind === 'fields' ? eventFieldsPage(event.eventId, chosen.id, { sort: fq.sort, dir: fq.dir, offset: (fq.page - 1) * PAGE_SIZE, limit: PAGE_SIZE, filter }) : null;
	const fields = (fieldPage?.rows ?? []).map((f) => ({ ...f, visibility: see(f) }));
	const dropped = [
		...galaxyRows.filter((r) => r.visibility?.sunDropped).map((r) => ({ id: r.name, reason: r.visibility!.sunDropped! })),
		...fields.filter((f) => f.visibility?.sunDropped).map((f) => ({ id: f.fieldId, reason: f.visibility!.sunDropped! }))
	];

	// Claim state per target: only the open or finished claims matter to someone choosing what to observe.
	const claimRows = claims.listClaims(event.eventId).filter((c) => c.state !== 'released' && c.state !== 'lapsed');
	const claimOf = (kind: 'galaxy' | 'field', id: string) => {
		const c = claimRows.filter((r) => r.targetKind === kind && r.targetId === id).sort((a, b) => (a.state === 'done' ? 1 : 0) - (b.state === 'done' ? 1 : 0))[0];
		return c ? { id: c.id, state: c.state, teamId: c.teamId, teamName: c.teamName, telescopeId: c.telescopeId, telescopeName: c.telescopeName, filter: c.filter, epoch: c.epoch } : null;
	};
	const mayClaim = Boolean(user && can({ user, telescopeId: null }, 'claims.create'));
	const coordinator = Boolean(user && actsForEveryTeam(user));
	const manages = Boolean(user && can({ user, telescopeId: null }, 'claims.manage'));
	const ownTelescopes = usableTelescopes(user, telescopes).map((t) => ({ id: t.id, name: t.name, teamName: t.teamName }));

	return {
		claiming: { allowed: mayClaim, coordinator, teamIds: user?.teamIds ?? [], telescopes: ownTelescopes, telescopeId: ownTelescopes.find((t) => t.id === chosen?.id)?.id ?? ownTelescopes[0]?.id ?? null },
		managing: manages
			? { lapseMinutes: claims.lapseMinutesFor(event.eventId), telescopes: telescopes.map((t) => ({ id: t.id, name: t.name, teamName: t.teamName })) }
			: null,
		event: { id: event.eventId, sourceEventId: event.sourceEventId, state: event.state, skymap: event.skymap },
		meta: meta && {
			skymapId: meta.skymapId,
			catalog: meta.catalog,
			mode: meta.mode,
			level: meta.level,
			regionAreaDeg2: meta.regionAreaDeg2,
			candidates: meta.candidates,
			galaxiesStored: meta.galaxiesStored,
			withoutDistance: meta.withoutDistance,
			completeness: meta.completeness,
			computedAt: meta.computedAt.toISOString(),
			computeMs: meta.computeMs
		},
		stale: Boolean(meta && event.skymap && meta.skymapId !== event.skymap.skymapId),
		telescopes: views,
		chosen: chosenView,
		filters: {
			observableNow: query.observableNow,
			unclaimed: query.unclaimed,
			teamId: team?.id ?? null,
			teamName: team?.name ?? null,
			active,
			teams,
			darkNow: sky?.dark ?? false
		},
		showGalaxyVisibility,
		galaxies: galaxyRows.map((r) => ({ ...r, claim: claimOf('galaxy', String(r.galaxyId)) })),
		fields: fields.map((f) => ({ ...f, claim: claimOf('field', f.fieldId) })),
		dropped,
		now: now.toISOString(),
		paging: { ...paging(g.page, galaxyPage.total, g.sort, g.dir), stored: galaxyPage.stored },
		fieldPaging: { ...paging(fq.page, fieldPage?.total ?? 0, fq.sort, fq.dir), stored: fieldPage?.stored ?? 0 }
	};
}

export type TargetsPageData = NonNullable<ReturnType<typeof targetsPageData>>;
