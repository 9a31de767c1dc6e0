import type { LiveAction } from './live-messages.ts';

/** A phrase for every action (checked: a new action without one does not compile). */
const PHRASES: { readonly [A in LiveAction]: string } = {
	'targets.ranked': 'Targets ranked',
	'targets.catalog-switched': 'An event was switched to another galaxy catalogue',
	'catalog.started': 'Catalogue import started',
	'catalog.imported': 'Catalogue imported',
	'catalog.failed': 'Catalogue import failed',
	'claim.claimed': 'Target claimed',
	'claim.observing': 'Target being observed',
	'claim.done': 'Target observed',
	'claim.released': 'Claim released',
	'claim.lapsed': 'Claim lapsed',
	'claim.reassigned': 'Claim reassigned',
	'claim.settings': 'Claim lapse time changed',
	'observation.reported': 'Observation reported',
	'observation.uploaded': 'Pointings uploaded',
	'candidate.reported': 'Transient candidate reported',
	'candidate.photometry': 'Photometry added to a candidate',
	'candidate.vetted': 'Candidate vetting updated',
	'candidate.kilonova-like': 'A candidate looks kilonova-like',
	'candidate.taken': 'Candidate taken for a spectrum',
	'candidate.released': 'Spectrum taker stood back',
	'candidate.spectrum': 'Spectrum uploaded',
	'candidate.classified': 'Candidate classified',
	'candidate.decided': 'Candidate state set',
	'candidate.comment': 'Comment on a candidate',
	'candidate.mail-failed': 'A candidate e-mail could not be sent',
	'kilonova.thresholds-changed': 'Kilonova rule thresholds changed',
	'person.invited': 'Invitation sent',
	'person.invitation-withdrawn': 'Invitation withdrawn',
	'person.joined': 'A new member joined',
	'person.roles-changed': 'Roles changed',
	'person.disabled': 'Account disabled',
	'person.enabled': 'Account enabled',
	'team.created': 'Team created',
	'team.updated': 'Team updated',
	'team.member-added': 'Team member added',
	'team.member-removed': 'Team member removed',
	'telescope.created': 'Telescope added',
	'telescope.updated': 'Telescope updated',
	'token.issued': 'API token issued',
	'token.revoked': 'API token revoked',
	'duty.paged': 'Duty scientist paged',
	'duty.escalated': 'Page escalated to the next person on the roster',
	'duty.escalation-exhausted': 'Page unanswered: nobody further on the roster',
	'duty.nobody-on-shift': 'Nobody on shift: every duty scientist paged',
	'duty.nobody-to-page': 'Nobody could be paged',
	'duty.mail-failed': 'A page e-mail could not be sent',
	'duty.page-delivery': 'Page delivery tried',
	'event.acknowledged': 'Event acknowledged',
	'shift.added': 'Shift added to the roster',
	'shift.removed': 'Shift removed from the roster',
	'shift.handover-written': 'Hand-over note written',
	'event.created': 'New event',
	'notice.processed': 'Notice processed',
	'notice.rejected': 'Malformed notice kept in the inbox',
	'skymap.analysed': 'Sky map analysed',
	'skymap.failed': 'Sky map could not be used',
	'event.retracted': 'Event retracted by the source',
	'triage.policy-changed': 'Triage policy changed',
	'event.closed': 'Event closed by a coordinator',
	'event.reopened': 'Event reopened by a coordinator',
	'catalog.progress': 'Catalogue import under way'
};

/** A short sentence for an event-log action, for the board's activity list (an unknown action as it is). */
export function describeAction(action: string): string {
	return (PHRASES as Readonly<Record<string, string | undefined>>)[action] ?? action;
}

/** Actions logged for live clients only (progress ticks), left out of the activity list. */
export const QUIET_ACTIONS: readonly LiveAction[] = ['catalog.progress', 'duty.page-delivery'];
