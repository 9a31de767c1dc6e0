/**
 * The shapes the board and the event page receive from the server (plain, serialisable values;
 * times as ISO-8601 strings). Shared by `$lib/server/board` and the components.
 */
export type NoticeKind = 'preliminary' | 'initial' | 'update' | 'retraction' | 'followup';
export type NoticeRole = 'observation' | 'test' | 'utility';
export type EventState = 'active' | 'retracted' | 'closed';

/** Why a coordinator closed an event (stored as these ids; shown with `CLOSE_REASON_LABELS`). */
export const CLOSE_REASONS = ['search-complete', 'retracted', 'not-pursued', 'counterpart-found'] as const;
export type CloseReason = (typeof CLOSE_REASONS)[number];

/** The reasons in our words: `short` inside a sentence ("closed … (search complete)"), `long` in the form's choice. */
export const CLOSE_REASON_LABELS: { readonly [R in CloseReason]: { short: string; long: string } } = {
	'search-complete': { short: 'search complete', long: 'Search complete: the region was covered as far as planned' },
	retracted: { short: 'alert retracted', long: 'Alert retracted: the source withdrew it' },
	'not-pursued': { short: 'not followed up', long: 'Not followed up: we decided not to pursue it' },
	'counterpart-found': { short: 'counterpart found', long: 'Counterpart found: the search is over' }
};

/** Who closed an event, when, why, with their note (null while the event is open). */
export interface ClosureView {
	reason: CloseReason;
	note: string | null;
	/** The closer's name (null when their account is gone). */
	by: string | null;
	at: string;
}

export interface Classification {
	BNS: number | null;
	NSBH: number | null;
	BBH: number | null;
	Terrestrial: number | null;
}

export interface TriageVerdict {
	verdict: 'follow' | 'skip';
	reasons: string[];
}

export interface SkymapView {
	noticeId: string;
	area50Deg2: number | null;
	area90Deg2: number | null;
	area99Deg2: number | null;
	distanceMeanMpc: number | null;
	distanceStdMpc: number | null;
	peak: { raDeg: number; decDeg: number } | null;
	warnings: string[];
	error: string | null;
}

export interface NoticeView {
	id: string;
	kind: NoticeKind;
	role: NoticeRole;
	authoredAt: string;
	receivedAt: string | null;
	farHz: number | null;
	classification: Classification | null;
	area90Deg2: number | null;
	skymapError: string | null;
}

export interface PageRow {
	id: string;
	noticeId: string;
	level: number;
	to: string;
	sentAt: string;
	escalatedAt: string | null;
	acknowledgedAt: string | null;
	acknowledgedBy: string | null;
	latencyS: number | null;
	/** Each channel the page went by (e-mail, text, voice): its state and tries. */
	deliveries: { channel: 'email' | 'sms' | 'voice'; status: 'queued' | 'sent' | 'failed'; attempts: number; lastError: string | null }[];
}

export interface AckView {
	state: 'none' | 'open' | 'acknowledged';
	openSince: string | null;
	waitingOn: string[];
	acknowledgedBy: string | null;
	acknowledgedAt: string | null;
	latencyS: number | null;
}

export interface EventView {
	id: string;
	sourceEventId: string;
	state: EventState;
	role: NoticeRole;
	eventTime: string | null;
	createdAt: string;
	retractedAt: string | null;
	/** The reason the retraction notice gave, in the source's words (null: none given, or not retracted). */
	retractionReason: string | null;
	/** Set while the event is closed. */
	closure: ClosureView | null;
	latestKind: NoticeKind | null;
	farHz: number | null;
	classification: Classification | null;
	properties: Record<string, number | boolean | null> | null;
	triage: TriageVerdict | null;
	skymap: SkymapView | null;
	notices: NoticeView[];
	ack: AckView;
}

export interface EventDetail extends EventView {
	pages: PageRow[];
	escalateAfterMin: number;
	skymaps: (SkymapView & { id: string; createdAt: string })[];
}

/** What an event's exports hold, one file each as CSV or JSON (`/events/{id}/export/{kind}.{csv|json}`). */
export const EXPORT_KINDS = ['pointings', 'claims', 'candidates', 'photometry'] as const;
export type ExportKind = (typeof EXPORT_KINDS)[number];
