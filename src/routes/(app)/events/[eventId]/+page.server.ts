import { error } from '@sveltejs/kit';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/guard';
import { can } from '$lib/server/permissions';
import { validateForm, failWith } from '$lib/server/forms';
import { eventDetail } from '$lib/server/board';
import * as duty from '$lib/server/duty';
import { skymapDisplay } from '$lib/server/events';
import { isStoredRaster, packRaster } from '$lib/components/sky/raster-image';
import type { SkyBody, SkyContour, DisplayRaster } from '$lib/components/sky/types';
import { moonPhase, moonPosition, sunPosition } from '$lib/targeting/night';

export const load: PageServerLoad = ({ params, locals, depends }) => {
	requirePermission('events.view');
	depends('app:event');
	const event = eventDetail(params.eventId);
	if (!event) error(404, 'No such event.');
	return { event, canAcknowledge: can({ user: locals.user }, 'events.acknowledge'), sky: skyViewData(event) };
};

const ackSchema = z.object({ confirm: z.literal('yes', { error: 'Confirm the acknowledgement.' }) });

export const actions: Actions = {
	acknowledge: async ({ request, params }) => {
		const user = requireUser('events.acknowledge');
		const { form, failure } = await validateForm(request, ackSchema);
		if (failure) return failure;
		try {
			const { latencyS } = duty.acknowledge(user, params.eventId);
			return { done: `Acknowledged ${Math.round(latencyS)} s after the notice arrived.` };
		} catch (e) {
			if (e instanceof duty.DutyError) return failWith(form, {}, 400, e.message);
			throw e;
		}
	}
};

// ── Sky view ──
/** Display avoidance radii: the telescope defaults (telescope.min_sun/moon_separation_deg). */
const SUN_AVOID_DEG = 45;
const MOON_AVOID_DEG = 20;

/**
 * The current map's stored display raster, packed for the browser, its contours, and the Sun and
 * Moon now. Positions are topocentric for a reference point on the equator at longitude 0; the
 * Moon's parallax (≤ 1°) is below what the overview shows.
 */
function skyViewData(event: NonNullable<ReturnType<typeof eventDetail>>): {
	raster: DisplayRaster | null;
	contours: SkyContour[];
	sun: SkyBody;
	moon: SkyBody;
} {
	const usable = event.skymaps.filter((m) => !m.error);
	const current = usable.findLast((m) => m.noticeId === event.skymap?.noticeId) ?? usable.at(-1);
	const display = current ? skymapDisplay(current.id) : null;
	const now = new Date();
	const site = { latitudeDeg: 0, longitudeDeg: 0, elevationM: 0 };
	const sun = sunPosition(site, now);
	const moon = moonPosition(site, now);
	return {
		raster: isStoredRaster(display) ? packRaster(display) : null,
		contours: Array.isArray(display?.contours) ? (display.contours as SkyContour[]) : [],
		sun: { raDeg: sun.raDeg, decDeg: sun.decDeg, avoidRadiusDeg: SUN_AVOID_DEG },
		moon: { raDeg: moon.raDeg, decDeg: moon.decDeg, avoidRadiusDeg: MOON_AVOID_DEG, illumination: moonPhase(now).illumination }
	};
}
