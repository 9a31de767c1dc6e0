/**
 * The shapes the board and the event page receive from the server (plain, serialisable values;
 * times as ISO-8601 strings). Shared by `$lib/server/board` and the components.
 */
export type NoticeKind = 'preliminary' | 'initial' | 'update' | 'retraction' | 'followup';
export type NoticeRole = 'observation' | 'test' | 'utility';
export type EventState = 'active' | 'retracted' | 'closed';

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
