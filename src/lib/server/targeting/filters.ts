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
import { eventFieldsPage, eventGalaxies, FIELD_SORTS, GALAXY_SORTS, MAX_FIELDS, STORED_GALAXIES, targetsMeta, type FieldSort, type GalaxySort, type TargetFilter } from './rankings';
import { telescopeViews } from './visibility-view';
import { observableNowMask, skyNow, tonightFor, visibility } from '../../targeting/visibility.ts';
import { sunAvoidance } from '../../targeting/sun-moon.ts';
import { DISTANCE_OUTLIER_P } from '../../targeting/galaxies.ts';

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

/**
 * A page number from the query: a whole number from 1 to `lastPage`. Anything else an edited link
 * may carry (1e309, -4, 2.5, "x", 10^20) becomes the nearest page that exists (fractions round down,
 * non-numbers give the first page), so the offset handed to the database is always a small integer.
 */
export function pageNumber(v: string | null, lastPage: number): number {
	const n = Number(v);
	if (v === null || v.trim() === '' || Number.isNaN(n) || n < 1) return 1;
	return Math.max(1, Math.min(lastPage, Math.floor(n)));
}
/** Most pages a table can have: its stored rows at most, a page at a time. */
const LAST_GALAXY_PAGE = Math.ceil(STORED_GALAXIES / PAGE_SIZE);
const LAST_FIELD_PAGE = Math.ceil(MAX_FIELDS / PAGE_SIZE);
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
		galaxies: { page: pageNumber(q.get('page'), LAST_GALAXY_PAGE), sort: pick(GALAXY_SORTS, q.get('sort'), 'rank'), dir: q.get('dir') === 'desc' ? 'desc' : 'asc' },
		fields: { page: pageNumber(q.get('fpage'), LAST_FIELD_PAGE), sort: pick(FIELD_SORTS, q.get('fsort'), 'rank'), dir: q.get('fdir') === 'desc' ? 'desc' : 'asc' }
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

	// Visibility is for one telescope at a time (its site, limits and tonight): one of the looker's
	// own team telescopes; coordinators, and people in no team with telescopes, may look through any.
	const coordinator = Boolean(user && actsForEveryTeam(user));
	const ownTelescopes = usableTelescopes(user, telescopes);
	const lookable = ownTelescopes.length && !coordinator ? ownTelescopes : telescopes;
	const kindOf = (id: string) => views.find((v) => v.id === id)?.kind;
	const chosen = lookable.find((t) => t.id === query.telescopeId) ?? lookable.find((t) => kindOf(t.id) === 'galaxies') ?? lookable[0] ?? null;
	const chosenView = chosen ? views.find((v) => v.id === chosen.id)! : null;
	const night = chosen ? tonightFor(chosen, now) : null;
	const sky = chosen ? skyNow(chosen, night, now) : null;
	const see = (target: { ra: number; dec: number }) => (chosen && night ? visibility(chosen, night, { raDeg: target.ra, decDeg: target.dec }, now) : null);
	/** Why the chosen telescope may not take a target (its own Sun-avoidance limit now), or null. */
	const sunBlock = (target: { ra: number; dec: number }, v: { sunDropped: string | null } | null) => {
		if (!chosen) return null;
		if (v) return v.sunDropped;
		const verdict = sunAvoidance({ raDeg: target.ra, decDeg: target.dec }, now, chosen.minSunSeparationDeg);
		return verdict.ok ? null : `dropped for Sun avoidance: ${verdict.reason}`;
	};

	const teams = [...new Map(telescopes.map((t) => [t.teamId, { id: t.teamId, name: t.teamName }])).values()].sort((a, b) => a.name.localeCompare(b.name));
	const team = teams.find((t) => t.id === query.teamId) ?? null;
	const filter: TargetFilter = {
		unclaimed: query.unclaimed,
		teamId: team?.id ?? null,
		sky: query.observableNow && sky ? (ra, dec) => observableNowMask(sky, ra, dec) : null
	};
	const active = query.observableNow || query.unclaimed || team !== null;

	// A page past the last (an edited link, or rows that a filter or a new ranking took away) shows the last one.
	const g = { ...query.galaxies };
	const galaxiesAt = (pageNo: number) => eventGalaxies(event.eventId, { sort: g.sort, dir: g.dir, offset: (pageNo - 1) * PAGE_SIZE, limit: PAGE_SIZE, filter });
	let galaxyPage = galaxiesAt(g.page);
	if (g.page > 1 && galaxyPage.galaxies.length === 0) {
		g.page = Math.max(1, Math.ceil(galaxyPage.total / PAGE_SIZE));
		galaxyPage = galaxiesAt(g.page);
	}
	const showGalaxyVisibility = chosenView?.kind === 'galaxies' || query.observableNow;
	const galaxyRows = galaxyPage.galaxies.map((r) => {
		const v = showGalaxyVisibility ? see(r) : null;
		return { ...r, visibility: v, sunBlocked: sunBlock(r, v) };
	});

	const fq = { ...query.fields };
	const fieldsAt = (pageNo: number) =>
		chosen && chosenView?.kind === 'fields' ? eventFieldsPage(event.eventId, chosen.id, { sort: fq.sort, dir: fq.dir, offset: (pageNo - 1) * PAGE_SIZE, limit: PAGE_SIZE, filter }) : null;
	let fieldPage = fieldsAt(fq.page);
	if (fieldPage && fq.page > 1 && fieldPage.rows.length === 0) {
		fq.page = Math.max(1, Math.ceil(fieldPage.total / PAGE_SIZE));
		fieldPage = fieldsAt(fq.page);
	}
	const fields = (fieldPage?.rows ?? []).map((f) => {
		const v = see(f);
		return { ...f, visibility: v, sunBlocked: sunBlock(f, v) };
	});
	const dropped = [
		...galaxyRows.filter((r) => r.sunBlocked).map((r) => ({ id: r.name, reason: r.sunBlocked! })),
		...fields.filter((f) => f.sunBlocked).map((f) => ({ id: f.fieldId, reason: f.sunBlocked! }))
	];

	// Claim state per target: only the open or finished claims matter to someone choosing what to observe.
	const claimRows = claims.listClaims(event.eventId).filter((c) => c.state !== 'released' && c.state !== 'lapsed');
	const claimOf = (kind: 'galaxy' | 'field', id: string) => {
		const c = claimRows.filter((r) => r.targetKind === kind && r.targetId === id).sort((a, b) => (a.state === 'done' ? 1 : 0) - (b.state === 'done' ? 1 : 0))[0];
		return c ? { id: c.id, state: c.state, teamId: c.teamId, teamName: c.teamName, telescopeId: c.telescopeId, telescopeName: c.telescopeName, filter: c.filter, epoch: c.epoch } : null;
	};
	const mayClaim = Boolean(user && can({ user, telescopeId: null }, 'claims.create'));
	const manages = Boolean(user && can({ user, telescopeId: null }, 'claims.manage'));
	// A claim from this page uses the telescope whose visibility is shown, when the looker's team owns it
	// (coordinators: any). The server still decides (claims.claim checks the team and the Sun again).
	const claimTelescopeId = mayClaim && chosen && ownTelescopes.some((t) => t.id === chosen.id) ? chosen.id : null;
	/** A Claim button only where the claim can succeed: open target, active event, the telescope may take it. */
	const canClaim = (claim: unknown, sunBlocked: string | null) => Boolean(claimTelescopeId && event.state === 'active' && !claim && !sunBlocked);

	return {
		claiming: {
			allowed: mayClaim,
			coordinator,
			teamIds: user?.teamIds ?? [],
			telescopes: mayClaim ? ownTelescopes.map((t) => ({ id: t.id, name: t.name, teamName: t.teamName })) : [],
			telescopeId: claimTelescopeId
		},
		/** Telescopes whose visibility this person may look at (links in the telescope table). */
		lookableIds: lookable.map((t) => t.id),
		lookingAsTeam: lookable !== telescopes,
		managing: manages
			? { lapseMinutes: claims.lapseMinutesFor(event.eventId), telescopes: telescopes.map((t) => ({ id: t.id, name: t.name, teamName: t.teamName })) }
			: null,
		event: { id: event.eventId, sourceEventId: event.sourceEventId, state: event.state, skymap: event.skymap, closure: event.closure },
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
		galaxies: galaxyRows.map((r) => {
			const claim = claimOf('galaxy', String(r.galaxyId));
			return { ...r, claim, claimable: canClaim(claim, r.sunBlocked) };
		}),
		fields: fields.map((f) => {
			const claim = claimOf('field', f.fieldId);
			return { ...f, claim, claimable: canClaim(claim, f.sunBlocked) };
		}),
		distanceOutlierP: DISTANCE_OUTLIER_P,
		dropped,
		now: now.toISOString(),
		paging: { ...paging(g.page, galaxyPage.total, g.sort, g.dir), stored: galaxyPage.stored },
		fieldPaging: { ...paging(fq.page, fieldPage?.total ?? 0, fq.sort, fq.dir), stored: fieldPage?.stored ?? 0 }
	};
}

export type TargetsPageData = NonNullable<ReturnType<typeof targetsPageData>>;
