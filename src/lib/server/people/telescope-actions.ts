import { redirect } from '@sveltejs/kit';
import type { RequestEvent } from '@sveltejs/kit';
import { requireUser } from './guard';
import { validateForm, failFromError } from '../platform/forms';
import { actorOf } from '../platform/realtime';
import * as telescopes from './telescopes';

/** The create/update action shared by the new and edit pages. */
export async function saveTelescope(event: RequestEvent, id: string | null) {
	const user = requireUser('telescopes.manage');
	const { data, form, failure } = await validateForm(event.request, telescopes.telescopeInput);
	if (failure) return failure;
	try {
		if (id) telescopes.updateTelescope(actorOf(user), id, data);
		else telescopes.createTelescope(actorOf(user), data);
	} catch (e) {
		return failFromError(form, e);
	}
	redirect(303, '/telescopes');
}
