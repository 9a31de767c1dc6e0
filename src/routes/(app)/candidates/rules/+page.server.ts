import type { Actions, PageServerLoad } from './$types';
import { requirePermission, requireUser } from '$lib/server/people/guard';
import { can } from '$lib/server/people/permissions';
import { failFromError, failWith, formObject } from '$lib/server/platform/forms';
import { currentThresholds, setThresholds } from '$lib/server/candidates/vetting';
import { changesFrom, formValuesOf, thresholdsFromForm } from '$lib/candidates/threshold-form';
import { DEFAULT_KILONOVA_THRESHOLDS } from '$lib/candidates/rules';

export const load: PageServerLoad = ({ locals, depends }) => {
	requirePermission('events.view');
	depends('app:kilonova-rules');
	const view = currentThresholds();
	return {
		canEdit: can({ user: locals.user }, 'kilonova.thresholds'),
		values: formValuesOf(view.thresholds),
		defaults: formValuesOf(DEFAULT_KILONOVA_THRESHOLDS),
		rules: view.rules.map((r) => ({ id: r.id, label: r.label, changedFromDefault: r.changedFromDefault })),
		changed: Object.keys(view.changes).length > 0,
		updatedBy: view.updatedBy,
		updatedAt: view.updatedAt
	};
};

export const actions: Actions = {
	save: async ({ request }) => {
		const user = requireUser('kilonova.thresholds');
		const form = await request.formData();
		const read = thresholdsFromForm(formObject(form));
		if (read.errors) return failWith(form, read.errors);
		try {
			setThresholds(user, changesFrom(read.thresholds));
			return { saved: 'Thresholds saved. Every candidate of the events not retracted is being vetted again with them.' };
		} catch (e) {
			return failFromError(form, e);
		}
	},
	restore: async ({ request }) => {
		const user = requireUser('kilonova.thresholds');
		const form = await request.formData();
		try {
			setThresholds(user, {});
			return { saved: 'The default thresholds are back. Every candidate of the events not retracted is being vetted again with them.' };
		} catch (e) {
			return failFromError(form, e);
		}
	}
};
