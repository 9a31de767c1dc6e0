/**
 * The kinds of entry in an event's timeline, their labels, and which event-log action belongs to
 * which kind. Pure: shared by the server (building the timeline) and the page (the filter).
 */
import type { LiveAction } from '../live-messages.ts';

export const TIMELINE_KINDS = [
	'notice',
	'sky-map',
	'page',
	'acknowledgement',
	'targets',
	'claim',
	'pointing',
	'candidate',
	'photometry',
	'vetting',
	'spectroscopist',
	'spectrum',
	'classification',
	'decision',
	'discussion',
	'setting',
	'state'
] as const;

export type TimelineKind = (typeof TIMELINE_KINDS)[number];

/** The filter's words for each kind (our own plain words). */
export const TIMELINE_KIND_LABELS: { readonly [K in TimelineKind]: string } = {
	notice: 'Notices received',
	'sky-map': 'Sky maps',
	page: 'Duty pages',
	acknowledgement: 'Acknowledgements',
	targets: 'Target lists',
	claim: 'Claims',
	pointing: 'Pointings',
	candidate: 'Candidates',
	photometry: 'Photometry',
	vetting: 'Vetting',
	spectroscopist: 'Spectrum takers',
	spectrum: 'Spectra',
	classification: 'Classifications',
	decision: 'Candidate decisions',
	discussion: 'Discussion',
	setting: 'Changed settings',
	state: 'Event state'
};

/**
 * The timeline kind of every action; null for actions that are not about one event (people,
 * catalogues, global settings) or that are only progress ticks. Typed over every action so a new
 * one does not compile until it is placed; the close-out actions are named ahead of their
 * declaration, so the map needs no change when they land.
 */
export const ACTION_KIND: { readonly [A in LiveAction]: TimelineKind | null } & Readonly<Record<string, TimelineKind | null>> = {
	'event.created': 'state',
	'event.retracted': 'state',
	'event.closed': 'state',
	'event.reopened': 'state',
	'notice.rejected': null,
	'notice.processed': 'notice',
	'skymap.analysed': 'sky-map',
	'skymap.failed': 'sky-map',
	'triage.policy-changed': null,
	'duty.paged': 'page',
	'duty.escalated': 'page',
	'duty.escalation-exhausted': 'page',
	'duty.nobody-on-shift': 'page',
	'duty.nobody-to-page': 'page',
	'duty.mail-failed': 'page',
	'duty.page-delivery': 'page',
	'event.acknowledged': 'acknowledgement',
	'shift.added': null,
	'shift.removed': null,
	'shift.handover-written': null,
	'targets.ranked': 'targets',
	'targets.catalog-switched': 'setting',
	'catalog.started': null,
	'catalog.progress': null,
	'catalog.imported': null,
	'catalog.failed': null,
	'claim.claimed': 'claim',
	'claim.observing': 'claim',
	'claim.done': 'claim',
	'claim.released': 'claim',
	'claim.lapsed': 'claim',
	'claim.reassigned': 'claim',
	'claim.settings': 'setting',
	'observation.reported': 'pointing',
	'observation.uploaded': 'pointing',
	'candidate.reported': 'candidate',
	'candidate.photometry': 'photometry',
	'candidate.vetted': 'vetting',
	'candidate.kilonova-like': 'vetting',
	'candidate.taken': 'spectroscopist',
	'candidate.released': 'spectroscopist',
	'candidate.spectrum': 'spectrum',
	'candidate.classified': 'classification',
	'candidate.decided': 'decision',
	'candidate.comment': 'discussion',
	'candidate.mail-failed': 'discussion',
	'kilonova.thresholds-changed': null,
	'person.invited': null,
	'person.invitation-withdrawn': null,
	'person.joined': null,
	'person.roles-changed': null,
	'person.disabled': null,
	'person.enabled': null,
	'team.created': null,
	'team.updated': null,
	'team.member-added': null,
	'team.member-removed': null,
	'telescope.created': null,
	'telescope.updated': null,
	'token.issued': null,
	'token.revoked': null
};

/** The kind an action's entry has in a timeline, null when it has none (or the action is unknown). */
export function timelineKindOf(action: string): TimelineKind | null {
	return ACTION_KIND[action] ?? null;
}

/** A kind named in a query string, or null when it is not one of ours. */
export function parseTimelineKind(raw: string | null | undefined): TimelineKind | null {
	return raw && (TIMELINE_KINDS as readonly string[]).includes(raw) ? (raw as TimelineKind) : null;
}

/** "+2 h 07 min" after the merger (or "−3 min" before it); null without a merger time. */
export function sinceMerger(atMs: number, mergerMs: number | null): string | null {
	if (mergerMs === null) return null;
	const d = atMs - mergerMs;
	const s = Math.floor(Math.abs(d) / 1000);
	const pad = (n: number) => String(n).padStart(2, '0');
	let body: string;
	if (s < 60) body = `${s} s`;
	else if (s < 3600) body = `${Math.floor(s / 60)} min ${pad(s % 60)} s`;
	else if (s < 48 * 3600) body = `${Math.floor(s / 3600)} h ${pad(Math.floor(s / 60) % 60)} min`;
	else body = `${Math.floor(s / 86400)} d ${Math.floor(s / 3600) % 24} h`;
	return `${d < 0 ? '−' : '+'}${body}`;
}
