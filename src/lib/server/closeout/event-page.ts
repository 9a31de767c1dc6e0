/**
 * What the event page loads: the event, its coverage, the sky view, the replay's range and what
 * the viewer may do. It stays a few hundred kB however busy the event is: coverage curves are
 * thinned to what the chart shows, repeated footprints are drawn once and only the latest places
 * are drawn (event-sky.ts), replay changes are one per slider slice (sky-replay.ts); the lists of
 * pointings and claims are paged on their own pages.
 */
import type { SessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { telescopesFor } from '../people/scope';
import { eventDetail } from '../alerts/board';
import { eventCoverage } from '../coordination/event-coverage';
import { listClaims } from '../coordination/claims';
import { eventSky } from '../targeting/event-sky';
import { claimsOutsideRanking } from '../targeting/event-catalog';
import { replayBounds } from './sky-replay';
import { EXPORT_KINDS } from '../../event-view';
import { isWideField } from '../../targeting/telescope.ts';
import { thinStepCurve } from '../../sky-view/step-curve.ts';
import { COVERAGE_CURVE_POINTS_MAX } from '../../limits.ts';

/** The event page's data for `user`; null when there is no such event. */
export async function eventPage(eventId: string, user: SessionUser | null) {
	const event = eventDetail(eventId);
	if (!event) return null;
	const usable = event.skymaps.filter((m) => !m.error);
	const current = usable.findLast((m) => m.noticeId === event.skymap?.noticeId) ?? usable.at(-1);
	const covered = await eventCoverage(event.id);
	// Telescopes the viewer may claim with: their teams' (coordinators: every one).
	const scopes = user ? telescopesFor(user) : [];
	const telescopes = user && can({ user, telescopeId: null }, 'claims.create') ? scopes.map((t) => ({ id: t.id, name: t.name, teamName: t.teamName, wide: isWideField(t) })) : [];
	// Hours to 0.36 s and probabilities to 1e-6: far below what the chart can show, and a third of the digits.
	const thin = (curve: [number, number][]) => thinStepCurve(curve, COVERAGE_CURVE_POINTS_MAX).map(([h, p]): [number, number] => [Math.round(h * 1e4) / 1e4, Math.round(p * 1e6) / 1e6]);
	return {
		event,
		canAcknowledge: can({ user }, 'events.acknowledge'),
		canClose: can({ user }, 'events.close'),
		// The report page is only useful to someone with a telescope to report for.
		mayReport: Boolean(user && scopes.length && can({ user }, 'observations.report')),
		// The raster (most of the picture's bytes, the same for every load) is fetched on its own and cached by the browser.
		sky: eventSky(event.id, current?.id ?? null, user, covered, new Date(), { inlineRaster: false }),
		// The replay slider's range (first notice to close or now) and the moments where the picture changes.
		replay: replayBounds(event.id),
		openClaims: listClaims(event.id, { openOnly: true }).length,
		coverage: covered && {
			observations: covered.observations,
			union: covered.union,
			errorBound: covered.errorBound,
			sumOfFootprints: covered.sumOfFootprints,
			curve: thin(covered.curve),
			galaxyCurve: thin(covered.galaxyCurve),
			teams: covered.teams.map((t) => ({ ...t, curve: thin(t.curve) })),
			galaxies: covered.galaxies,
			computeMs: covered.computeMs
		},
		claiming: { telescopes, canClaim: telescopes.length > 0 && event.state === 'active' },
		exports: EXPORT_KINDS,
		// Claims a re-ranking (another catalogue, a new map) left outside the ranking: shown, never hidden.
		outside: claimsOutsideRanking(event.id)
	};
}
