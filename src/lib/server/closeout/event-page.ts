/**
 * What the event page loads: the event, its coverage, the replay's range and what the viewer may
 * do; the sky view (galaxies, fields, footprints, candidates) is fetched on its own from
 * `/events/{id}/sky/view` (`eventSkyView`). It stays a few tens of kB however busy the event is:
 * coverage curves are thinned to what the chart shows, repeated footprints are drawn once and only
 * the latest places are drawn (event-sky.ts), replay changes are one per slider slice
 * (sky-replay.ts); the lists of pointings and claims are paged on their own pages.
 *
 * Under a crowd most of this is the same for everyone: it is built once per change of the event
 * (`eventVersion`: the latest entry logged to the event's room or the board) and shared, and only
 * what depends on the viewer (permissions, their telescopes, their team's claims on the sky) or on
 * the clock (the Sun and Moon, the replay's end) is worked out per request.
 */
import type { SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { telescopesFor } from '../people/scope';
import { eventDetail } from '../alerts/board';
import { eventCoverage } from '../coordination/event-coverage';
import { listClaims } from '../coordination/claims';
import { listCandidates } from '../candidates/candidates';
import { eventSky, skyBodies } from '../targeting/event-sky';
import { claimsOutsideRanking } from '../targeting/event-catalog';
import { eventVersion } from '../platform/realtime';
import { versionedCache } from '../platform/versioned-cache';
import { replayBounds } from './sky-replay';
import { EXPORT_KINDS } from '../../event-view';
import { isWideField } from '../../targeting/telescope.ts';
import { thinStepCurve } from '../../sky-view/step-curve.ts';
import { COVERAGE_CURVE_POINTS_MAX, PAGE_CACHE_EVENTS, PAGE_CACHE_TTL_MS } from '../../limits.ts';

// Hours to 0.36 s and probabilities to 1e-6: far below what the chart can show, and a third of the digits.
const thin = (curve: [number, number][]) => thinStepCurve(curve, COVERAGE_CURVE_POINTS_MAX).map(([h, p]): [number, number] => [Math.round(h * 1e4) / 1e4, Math.round(p * 1e6) / 1e6]);

/** The part of the page that is the same for every viewer, as of one version of the event. */
async function sharedPage(eventId: string) {
	const event = eventDetail(eventId);
	if (!event) return null;
	const usable = event.skymaps.filter((m) => !m.error);
	const current = usable.findLast((m) => m.noticeId === event.skymap?.noticeId) ?? usable.at(-1);
	const covered = await eventCoverage(event.id);
	return {
		event,
		skymapId: current?.id ?? null,
		covered,
		replay: replayBounds(event.id),
		openClaims: listClaims(event.id, { openOnly: true }).length,
		candidates: listCandidates(event.id).length,
		coverage: covered && {
			observations: covered.observations,
			union: covered.union,
			errorBound: covered.errorBound,
			sumOfFootprints: covered.sumOfFootprints,
			teams: covered.teams.map(({ curve: _curve, ...t }) => t),
			galaxies: covered.galaxies,
			computeMs: covered.computeMs
		},
		// The coverage chart's curves (drawn in the browser only) go with the sky view, as JSON made once per version.
		curves: JSON.stringify(
			covered ? { curve: thin(covered.curve), galaxyCurve: thin(covered.galaxyCurve), teams: covered.teams.map((t) => ({ teamId: t.teamId, curve: thin(t.curve) })) } : null
		),
		// Claims a re-ranking (another catalogue, a new map) left outside the ranking: shown, never hidden.
		outside: claimsOutsideRanking(event.id)
	};
}

const pages = versionedCache<Awaited<ReturnType<typeof sharedPage>>>({ max: PAGE_CACHE_EVENTS, ttlMs: PAGE_CACHE_TTL_MS });
const skies = versionedCache<string | null>({ max: PAGE_CACHE_EVENTS * 4, ttlMs: PAGE_CACHE_TTL_MS });
const viewerScopes = versionedCache<{ id: string; name: string; teamName: string; wide: boolean }[]>({ max: 256, ttlMs: PAGE_CACHE_TTL_MS });

function shared(eventId: string, version = eventVersion(eventId)) {
	return pages.get(eventId, version, () => sharedPage(eventId));
}

/** Where the page's sky view is fetched: the version in the address makes a change a new address. */
export function skyViewUrl(eventId: string, version: string): string {
	return `/events/${encodeURIComponent(eventId)}/sky/view?v=${version}`;
}

/** The event page's data for `user`; null when there is no such event. */
export async function eventPage(eventId: string, user: SessionUser | null, now = new Date()) {
	const version = eventVersion(eventId);
	const page = await shared(eventId, version);
	if (!page) return null;
	const { event } = page;
	// Telescopes the viewer may claim with: their teams' (coordinators: every one). Teams and
	// telescopes change with a log entry on the board, which the version follows.
	const viewerKey = user ? `${user.id}|${user.roles.join(',')}|${user.teamIds.join(',')}` : '-';
	const scopes = await viewerScopes.get(viewerKey, version, () =>
		(user ? telescopesFor(user) : []).map((t) => ({ id: t.id, name: t.name, teamName: t.teamName, wide: isWideField(t) }))
	);
	const telescopes = user && can({ user, telescopeId: null }, 'claims.create') ? scopes : [];
	// The replay ends at the close, else now: the shared range may have been worked out a little earlier.
	const replay = page.replay && (page.replay.closed ? page.replay : { ...page.replay, endMs: Math.max(page.replay.endMs, now.getTime()) });
	return {
		event,
		canAcknowledge: can({ user }, 'events.acknowledge'),
		canClose: can({ user }, 'events.close'),
		// The report page is only useful to someone with a telescope to report for.
		mayReport: Boolean(user && scopes.length && can({ user }, 'observations.report')),
		// The sky view (galaxies, fields, footprints, candidates) is fetched from here; its raster from its own path.
		sky: { url: skyViewUrl(event.id, version), candidates: page.candidates },
		replay,
		openClaims: page.openClaims,
		coverage: page.coverage,
		claiming: { telescopes, canClaim: telescopes.length > 0 && event.state === 'active' },
		exports: EXPORT_KINDS,
		outside: page.outside
	};
}

/**
 * The event's sky view for `user` as JSON (`SkyViewData`, event-sky.ts, with the coverage chart's
 * `curves`: `{ curve, galaxyCurve, teams: [{ teamId, curve }] }` or null), or null when there is no
 * such event. Built once per version of the event and set of viewer's teams (claims of one's own
 * team are drawn apart), with the Sun and Moon placed at `now`.
 */
export async function eventSkyView(eventId: string, user: SessionUser | null, now = new Date()): Promise<string | null> {
	const version = eventVersion(eventId);
	const teams = [...(user?.teamIds ?? [])].sort().join(',');
	const body = await skies.get(`${eventId}|${teams}`, version, async () => {
		const page = await shared(eventId, version);
		if (!page) return null;
		const { sun: _sun, moon: _moon, ...rest } = eventSky(page.event.id, page.skymapId, user, page.covered, now, { inlineRaster: false });
		return `{"curves":${page.curves},${JSON.stringify(rest).slice(1)}`;
	});
	if (body === null) return null;
	// The cached body is an object without the Sun and Moon: they go in front of its first key.
	return `${JSON.stringify(skyBodies(now)).slice(0, -1)},${body.slice(1)}`;
}
