/**
 * Every action the server writes to the event log and broadcasts on the live hub, with the shape
 * of its payload. One map for both ends: the server's `record()` and `onRecorded()` are typed by
 * it, and the browser narrows a message by its `type`. Payloads are as they travel (JSON): times
 * are ISO-8601 strings.
 *
 * Adding an action: add it here, give it a topic in `ACTION_TOPIC` and a phrase in `activity.ts`
 * (both are checked to name every action).
 */
import type { NoticeKind, NoticeRole, TriageVerdict } from './event-view.ts';
import type { SkymapSummary } from './sky/index.ts';
import type { TriagePolicyInput } from './alerts/triage.ts';
import type { RoleName } from './roles.ts';
import type { CandidateState, ClassificationLabel, Confidence, RejectionReason } from './candidates/labels.ts';
import type { KilonovaVerdict, ThresholdChanges } from './candidates/rules.ts';

/** The candidate a message is about. */
export type CandidateRef = {
	candidateId: string;
	eventId: string;
	name: string;
};

/** Rooms: the board (everything of interest to every signed-in client) or one event. */
export type Room = 'board' | `event:${string}`;

export type ClaimState = 'claimed' | 'observing' | 'done' | 'released' | 'lapsed';

/** What every message about one claim says of it. */
export type ClaimFields = {
	claimId: string;
	eventId: string;
	targetKind: 'galaxy' | 'field';
	targetId: string;
	/** '' = any filter. */
	filter: string;
	epoch: number;
	telescopeId: string;
	teamId: string;
	userId: string | null;
	state: ClaimState;
};

/** A claim completed by a reported observation that names its target. */
export type ClaimDoneByObservation = Pick<ClaimFields, 'claimId' | 'eventId' | 'targetKind' | 'targetId' | 'telescopeId' | 'teamId' | 'state'> & {
	observationId: string;
};

type EventNotice = { eventId: string; noticeId: string };

/** Action name → payload. */
export interface LivePayloads {
	// ── alerts ──
	'event.created': { eventId: string; sourceEventId: string };
	/** `reason`: the source's stated reason, when the notice gives one. */
	'event.retracted': { eventId: string; noticeId: string | null; reason: string | null };
	'notice.rejected': { inboxId: number; ivorn: string; error: string };
	'notice.processed': EventNotice & {
		ivorn: string;
		kind: NoticeKind;
		role: NoticeRole;
		/** Worth paging the duty scientist for: the triage policy says follow, and it is a real observation. */
		significant: boolean;
		triage: TriageVerdict;
		/** Whether this notice is now the event's latest. */
		latest: boolean;
	};
	/** `retried`: the download attempts it took, when the first one had failed for a passing reason. */
	'skymap.analysed': EventNotice & { skymapId: string; summary: SkymapSummary; retried?: number };
	'skymap.failed': EventNotice & { error: string };
	'triage.policy-changed': { policy: TriagePolicyInput };

	// ── close-out ──
	/** `reason`: one of CLOSE_REASONS (event-view.ts); `by`: the coordinator's name. */
	'event.closed': { eventId: string; reason: string; note: string | null; by: string };
	'event.reopened': { eventId: string; note: string | null; by: string };

	// ── duty ──
	'duty.paged': EventNotice & { level: number; to: string[]; fallback: boolean };
	'duty.escalated': EventNotice & { level: number; from: string[]; to: string[]; fallback: boolean };
	'duty.escalation-exhausted': EventNotice & { level: number; unanswered: string[] };
	'duty.nobody-on-shift': EventNotice & { paged: string[] };
	'duty.nobody-to-page': EventNotice;
	'duty.mail-failed': { eventId: string; userId: string; error: string };
	/** One try of one page by one channel: sent, failed and to be retried, or failed for good. */
	'duty.page-delivery': { eventId: string; pageId: string | null; userId: string; name: string; channel: 'email' | 'sms' | 'voice'; status: 'sent' | 'retrying' | 'failed'; attempts: number; error: string | null };
	'event.acknowledged': { eventId: string; by: string; latencyS: number; pages: number };
	'shift.added': { shiftId: string; userId: string; name: string; startsAt: string; endsAt: string; rank: number };
	'shift.removed': { shiftId: string; userId: string };
	'shift.handover-written': { shiftId: string };

	// ── targeting ──
	'targets.ranked': { eventId: string; skymapId: string; galaxies: number; fields: number; catalogId: string | null };
	'targets.catalog-switched': { eventId: string; fromCatalogId: string | null; fromName: string | null; toCatalogId: string; toName: string };
	'catalog.started': { catalogId: string; name: string; synthetic: boolean };
	/** `storing`: rows parsed and now being written (the last tick before `catalog.imported`). */
	'catalog.progress': { catalogId: string; bytes: number; rows: number; storing?: number };
	'catalog.imported': { catalogId: string; name: string; rows: number; rejected: number; synthetic: boolean };
	'catalog.failed': { catalogId: string; error: string | null; rejected: number };

	// ── coordination ──
	'claim.claimed': ClaimFields;
	'claim.observing': ClaimFields & { from: ClaimState };
	'claim.done': (ClaimFields & { from: ClaimState }) | ClaimDoneByObservation;
	/** Without `from` when the claim was released because the event was retracted or closed. */
	'claim.released': ClaimFields & { from?: ClaimState; reason: string };
	'claim.lapsed': ClaimFields & { from: 'claimed'; lapseMinutes: number };
	'claim.reassigned': ClaimFields & { fromTelescopeId: string; fromTeamId: string };
	/** `scope`: 'global' or the event id the lapse time is set for. */
	'claim.settings': { scope: string; lapseMinutes: number };
	'observation.reported': {
		observationId: string;
		eventId: string;
		telescopeId: string;
		teamId: string;
		source: 'form' | 'csv' | 'api';
		raDeg: number;
		decDeg: number;
		fieldId: string | null;
		filter: string;
		exposureS: number;
		limitingMag: number;
		completedClaimIds: string[];
	};
	/** A CSV upload of pointings by one telescope for one event: one message for all its rows. */
	'observation.uploaded': {
		eventId: string;
		telescopeId: string;
		teamId: string;
		source: 'form' | 'csv' | 'api';
		count: number;
		filters: string[];
		firstObservedAt: string;
		lastObservedAt: string;
		/** Only the pointings that completed claims, with the claims each completed. */
		completed: { observationId: string; claimIds: string[] }[];
	};

	// ── candidates ──
	'candidate.reported': {
		candidateId: string;
		eventId: string;
		name: string;
		raDeg: number;
		decDeg: number;
		positionErrArcsec: number | null;
		magnitude: number;
		filter: string;
		teamId: string;
		telescopeId: string | null;
		discoveredAt: string;
		nearCandidateIds: string[];
	};

	'candidate.photometry': CandidateRef & { added: number; filters: string[]; detections: number; upperLimits: number };
	'candidate.vetted': CandidateRef & { verdict: KilonovaVerdict; previousVerdict: KilonovaVerdict | null; credibleLevel: number | null; hostGalaxyId: string | null };
	/** The rules called the candidate kilonova-like for the first time. */
	'candidate.kilonova-like': CandidateRef & { credibleLevel: number | null; hostGalaxyId: string | null; reasons: string[] };
	'candidate.taken': CandidateRef & { takeId: string; userId: string; note: string };
	'candidate.released': CandidateRef & { takeId: string; userId: string };
	'candidate.spectrum': CandidateRef & {
		spectrumId: string;
		format: 'ascii' | 'fits-table' | 'fits-image';
		points: number;
		wavelengthMin: number;
		wavelengthMax: number;
		completedTakeId: string | null;
	};
	'candidate.classified': CandidateRef & {
		classificationId: string;
		label: ClassificationLabel;
		confidence: Confidence;
		redshift: number | null;
		summary: string;
		status: string;
	};
	'candidate.decided': CandidateRef & { state: CandidateState; from: CandidateState; reason: RejectionReason | null; summary: string };
	'candidate.comment': CandidateRef & { commentId: string };
	'candidate.mail-failed': { eventId: string; candidateId: string; userId: string; error: string };
	'kilonova.thresholds-changed': { changes: ThresholdChanges };

	// ── people ──
	'person.invited': { invitationId: string; email: string; roles: RoleName[] };
	'person.invitation-withdrawn': { invitationId: string };
	'person.joined': { userId: string; name: string; roles: RoleName[] };
	'person.roles-changed': { userId: string; roles: RoleName[] };
	'person.disabled': { userId: string };
	'person.enabled': { userId: string };
	'team.created': { teamId: string; name: string };
	'team.updated': { teamId: string; name: string };
	'team.member-added': { teamId: string; userId: string };
	'team.member-removed': { teamId: string; userId: string };
	'telescope.created': { telescopeId: string; name: string };
	'telescope.updated': { telescopeId: string; name: string };
	'token.issued': { tokenId: string; name: string; userId: string | null; telescopeId: string | null };
	'token.revoked': { tokenId: string };
}

export type LiveAction = keyof LivePayloads;

/**
 * One event-log entry as the hub sends it. Without a type argument, the union of every action's
 * message: checking `type` narrows `payload`.
 */
export type LiveMessage<A extends LiveAction = LiveAction> = {
	[K in A]: { seq: number; room: Room; type: K; actor: string; payload: LivePayloads[K]; at: string };
}[A];

/** What part of the work an action belongs to; pages refresh on the topics they show. */
export type LiveTopic = 'alerts' | 'duty' | 'roster' | 'targets' | 'catalogs' | 'claims' | 'observations' | 'candidates' | 'people';

export const ACTION_TOPIC: { readonly [A in LiveAction]: LiveTopic } = {
	'event.created': 'alerts',
	'event.retracted': 'alerts',
	'notice.rejected': 'alerts',
	'notice.processed': 'alerts',
	'skymap.analysed': 'alerts',
	'skymap.failed': 'alerts',
	'triage.policy-changed': 'alerts',
	'event.closed': 'alerts',
	'event.reopened': 'alerts',
	'duty.paged': 'duty',
	'duty.escalated': 'duty',
	'duty.escalation-exhausted': 'duty',
	'duty.nobody-on-shift': 'duty',
	'duty.nobody-to-page': 'duty',
	'duty.mail-failed': 'duty',
	'duty.page-delivery': 'duty',
	'event.acknowledged': 'duty',
	'shift.added': 'roster',
	'shift.removed': 'roster',
	'shift.handover-written': 'roster',
	'targets.ranked': 'targets',
	'targets.catalog-switched': 'targets',
	'catalog.started': 'catalogs',
	'catalog.progress': 'catalogs',
	'catalog.imported': 'catalogs',
	'catalog.failed': 'catalogs',
	'claim.claimed': 'claims',
	'claim.observing': 'claims',
	'claim.done': 'claims',
	'claim.released': 'claims',
	'claim.lapsed': 'claims',
	'claim.reassigned': 'claims',
	'claim.settings': 'claims',
	'observation.reported': 'observations',
	'observation.uploaded': 'observations',
	'candidate.reported': 'candidates',
	'candidate.photometry': 'candidates',
	'candidate.vetted': 'candidates',
	'candidate.kilonova-like': 'candidates',
	'candidate.taken': 'candidates',
	'candidate.released': 'candidates',
	'candidate.spectrum': 'candidates',
	'candidate.classified': 'candidates',
	'candidate.decided': 'candidates',
	'candidate.comment': 'candidates',
	'candidate.mail-failed': 'candidates',
	'kilonova.thresholds-changed': 'candidates',
	'person.invited': 'people',
	'person.invitation-withdrawn': 'people',
	'person.joined': 'people',
	'person.roles-changed': 'people',
	'person.disabled': 'people',
	'person.enabled': 'people',
	'team.created': 'people',
	'team.updated': 'people',
	'team.member-added': 'people',
	'team.member-removed': 'people',
	'telescope.created': 'people',
	'telescope.updated': 'people',
	'token.issued': 'people',
	'token.revoked': 'people'
};

/** Whether a message belongs to one of `topics` (false for an action this build does not know). */
export function inTopic(m: { type: string }, ...topics: LiveTopic[]): boolean {
	const topic = (ACTION_TOPIC as Readonly<Record<string, LiveTopic | undefined>>)[m.type];
	return topic !== undefined && topics.includes(topic);
}

/** Whether a message is one of `actions`; narrows its payload. */
export function isAction<A extends LiveAction>(m: LiveMessage, ...actions: A[]): m is Extract<LiveMessage, { type: A }> {
	return (actions as string[]).includes(m.type);
}

/** The event a message is about, when its payload names one. */
export function eventIdOf(m: LiveMessage): string | null {
	return 'eventId' in m.payload ? m.payload.eventId : null;
}
