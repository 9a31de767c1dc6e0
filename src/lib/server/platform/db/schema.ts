import { sql } from 'drizzle-orm';
import { ROLES_LIST } from '../../../roles';
import type { SkymapSummary } from '../../../sky/index';
import { NOTIFICATION_KINDS, QUIET_ACTIONS, type KindChoice, type NotificationKind, type SourceClass } from '../../../notifications';
import type { Classification, TriageVerdict } from '../../../event-view';
import { CHANNELS, type ChannelChoices } from '../../../page-channels';
import { CLOSE_REASONS } from '../../../event-view';
import type { KilonovaVerdict, ThresholdChanges } from '../../../candidates/rules';
import type { CandidateVetting } from '../../../candidates/vetting';
import type { SpectrumFormat, SpectrumSummary } from '../../../candidates/spectrum';
import type { NoticeVocabulary } from '../../../alerts/voevent';
import { WEBHOOK_KINDS, type WebhookBody, type WebhookKind } from '../../../webhooks';
import { CANDIDATE_STATES, CLASSIFICATION_LABELS, CONFIDENCE_LEVELS, REJECTION_REASONS } from '../../../candidates/labels';
import { sqliteTable, text, integer, real, primaryKey, index, uniqueIndex, check } from 'drizzle-orm/sqlite-core';

/** Roles a person can hold; one person may hold several. */
export const ROLES = ROLES_LIST;
export type Role = (typeof ROLES)[number];

const createdAt = () =>
	integer('created_at', { mode: 'timestamp_ms' })
		.notNull()
		.default(sql`(unixepoch('subsec') * 1000)`);

export const user = sqliteTable('user', {
	id: text('id').primaryKey(),
	email: text('email').notNull().unique(),
	name: text('name').notNull(),
	passwordHash: text('password_hash').notNull(),
	disabledAt: integer('disabled_at', { mode: 'timestamp_ms' }),
	isDemo: integer('is_demo', { mode: 'boolean' }).notNull().default(false),
	createdAt: createdAt()
});

export const userRole = sqliteTable(
	'user_role',
	{
		userId: text('user_id')
			.notNull()
			.references(() => user.id, { onDelete: 'cascade' }),
		role: text('role', { enum: ROLES }).notNull()
	},
	(t) => [primaryKey({ columns: [t.userId, t.role] })]
);

export const session = sqliteTable(
	'session',
	{
		/** SHA-256 of the token held in the cookie, hex. */
		id: text('id').primaryKey(),
		userId: text('user_id')
			.notNull()
			.references(() => user.id, { onDelete: 'cascade' }),
		expiresAt: integer('expires_at', { mode: 'timestamp_ms' }).notNull(),
		userAgent: text('user_agent'),
		ipAddress: text('ip_address'),
		createdAt: createdAt()
	},
	(t) => [index('session_user_idx').on(t.userId)]
);

export const invitation = sqliteTable('invitation', {
	id: text('id').primaryKey(),
	email: text('email').notNull(),
	roles: text('roles', { mode: 'json' }).$type<Role[]>().notNull(),
	teamIds: text('team_ids', { mode: 'json' }).$type<string[]>().notNull().default(sql`'[]'`),
	tokenHash: text('token_hash').notNull().unique(),
	invitedBy: text('invited_by').references(() => user.id, { onDelete: 'set null' }),
	expiresAt: integer('expires_at', { mode: 'timestamp_ms' }).notNull(),
	usedAt: integer('used_at', { mode: 'timestamp_ms' }),
	revokedAt: integer('revoked_at', { mode: 'timestamp_ms' }),
	createdAt: createdAt()
});

export const passwordReset = sqliteTable('password_reset', {
	id: text('id').primaryKey(),
	userId: text('user_id')
		.notNull()
		.references(() => user.id, { onDelete: 'cascade' }),
	tokenHash: text('token_hash').notNull().unique(),
	expiresAt: integer('expires_at', { mode: 'timestamp_ms' }).notNull(),
	usedAt: integer('used_at', { mode: 'timestamp_ms' }),
	createdAt: createdAt()
});

export const team = sqliteTable('team', {
	id: text('id').primaryKey(),
	name: text('name').notNull().unique(),
	region: text('region').notNull(),
	description: text('description').notNull().default(''),
	isDemo: integer('is_demo', { mode: 'boolean' }).notNull().default(false),
	createdAt: createdAt()
});

export const teamMember = sqliteTable(
	'team_member',
	{
		teamId: text('team_id')
			.notNull()
			.references(() => team.id, { onDelete: 'cascade' }),
		userId: text('user_id')
			.notNull()
			.references(() => user.id, { onDelete: 'cascade' })
	},
	(t) => [primaryKey({ columns: [t.teamId, t.userId] }), index('team_member_user_idx').on(t.userId)]
);

export const FOV_SHAPES = ['circle', 'rectangle'] as const;

export const telescope = sqliteTable(
	'telescope',
	{
		id: text('id').primaryKey(),
		teamId: text('team_id')
			.notNull()
			.references(() => team.id, { onDelete: 'restrict' }),
		name: text('name').notNull().unique(),
		siteName: text('site_name').notNull(),
		latitudeDeg: real('latitude_deg').notNull(),
		longitudeDeg: real('longitude_deg').notNull(),
		elevationM: real('elevation_m').notNull(),
		apertureM: real('aperture_m').notNull(),
		fovShape: text('fov_shape', { enum: FOV_SHAPES }).notNull(),
		/** Rectangle: width along RA; circle: diameter. */
		fovWidthDeg: real('fov_width_deg').notNull(),
		/** Rectangle: height along Dec; circle: equal to the width. */
		fovHeightDeg: real('fov_height_deg').notNull(),
		filters: text('filters', { mode: 'json' }).$type<string[]>().notNull(),
		limitingMag: real('limiting_mag').notNull(),
		limitingMagExposureS: real('limiting_mag_exposure_s').notNull(),
		minAltitudeDeg: real('min_altitude_deg').notNull().default(20),
		maxAirmass: real('max_airmass').notNull().default(2.5),
		minSunSeparationDeg: real('min_sun_separation_deg').notNull().default(45),
		minMoonSeparationDeg: real('min_moon_separation_deg').notNull().default(20),
		slewOverheadS: real('slew_overhead_s').notNull().default(60),
		robotic: integer('robotic', { mode: 'boolean' }).notNull().default(false),
		isDemo: integer('is_demo', { mode: 'boolean' }).notNull().default(false),
		createdAt: createdAt(),
		updatedAt: integer('updated_at', { mode: 'timestamp_ms' })
	},
	(t) => [
		index('telescope_team_idx').on(t.teamId),
		check('telescope_lat', sql`${t.latitudeDeg} BETWEEN -90 AND 90`),
		check('telescope_lon', sql`${t.longitudeDeg} BETWEEN -180 AND 180`),
		check('telescope_fov', sql`${t.fovWidthDeg} > 0 AND ${t.fovHeightDeg} > 0`)
	]
);

export const apiToken = sqliteTable(
	'api_token',
	{
		id: text('id').primaryKey(),
		name: text('name').notNull(),
		/** SHA-256 of the secret, hex. The secret itself is shown once and never stored. */
		tokenHash: text('token_hash').notNull().unique(),
		/** First characters of the token, to tell tokens apart in lists. */
		prefix: text('prefix').notNull(),
		userId: text('user_id').references(() => user.id, { onDelete: 'cascade' }),
		telescopeId: text('telescope_id').references(() => telescope.id, { onDelete: 'cascade' }),
		createdBy: text('created_by').references(() => user.id, { onDelete: 'set null' }),
		lastUsedAt: integer('last_used_at', { mode: 'timestamp_ms' }),
		revokedAt: integer('revoked_at', { mode: 'timestamp_ms' }),
		createdAt: createdAt()
	},
	(t) => [
		check('api_token_owner', sql`(${t.userId} IS NULL) <> (${t.telescopeId} IS NULL)`)
	]
);

/** Every action, in order. `seq` is what live clients use to catch up after a reconnect. */
export const eventLog = sqliteTable(
	'event_log',
	{
		seq: integer('seq').primaryKey({ autoIncrement: true }),
		actorUserId: text('actor_user_id').references(() => user.id, { onDelete: 'set null' }),
		actorLabel: text('actor_label').notNull(),
		action: text('action').notNull(),
		/** The live room the entry belongs to: 'board' or 'event:{id}'. */
		room: text('room').notNull().default('board'),
		payload: text('payload', { mode: 'json' }).$type<Record<string, unknown>>().notNull(),
		createdAt: createdAt()
	},
	(t) => [index('event_log_room_seq_idx').on(t.room, t.seq)]
);

export const signInAttempt = sqliteTable(
	'sign_in_attempt',
	{
		id: integer('id').primaryKey({ autoIncrement: true }),
		/** Lower-cased e-mail or client address the limit applies to. */
		key: text('key').notNull(),
		succeeded: integer('succeeded', { mode: 'boolean' }).notNull(),
		createdAt: createdAt()
	},
	(t) => [index('sign_in_attempt_key_idx').on(t.key, t.createdAt)]
);

/** A server-wide secret by name (e.g. the key that signs unsubscribe links), made once at random. */
export const serverSecret = sqliteTable('server_secret', {
	name: text('name').primaryKey(),
	/** Base64 of the random bytes. */
	value: text('value').notNull(),
	createdAt: createdAt()
});

/** What a person is e-mailed about and when; no row = the defaults (everything at once, every event). */
export const notificationPreference = sqliteTable('notification_preference', {
	userId: text('user_id')
		.primaryKey()
		.references(() => user.id, { onDelete: 'cascade' }),
	/** kind → 'now' | 'digest' | 'off'; a kind not listed is sent at once. */
	kinds: text('kinds', { mode: 'json' }).$type<Partial<Record<NotificationKind, KindChoice>>>().notNull(),
	/** Most probable classes followed; null = every event. */
	eventClasses: text('event_classes', { mode: 'json' }).$type<SourceClass[]>(),
	/** Local "HH:MM"; both null = no quiet hours. */
	quietStart: text('quiet_start'),
	quietEnd: text('quiet_end'),
	timeZone: text('time_zone').notNull().default('UTC'),
	quietAction: text('quiet_action', { enum: QUIET_ACTIONS }).notNull().default('hold'),
	digestPeriodMin: integer('digest_period_min').notNull().default(60),
	updatedAt: integer('updated_at', { mode: 'timestamp_ms' }).notNull()
});

export const OUTBOX_MODES = ['digest', 'held'] as const;

/** Mails waiting: for the person's digest, or for the end of their quiet hours. */
export const notificationOutbox = sqliteTable(
	'notification_outbox',
	{
		id: text('id').primaryKey(),
		userId: text('user_id')
			.notNull()
			.references(() => user.id, { onDelete: 'cascade' }),
		kind: text('kind', { enum: NOTIFICATION_KINDS }).notNull(),
		mode: text('mode', { enum: OUTBOX_MODES }).notNull(),
		subject: text('subject').notNull(),
		text: text('text').notNull(),
		/** A held mail goes at this time (the end of the quiet hours it arrived in). */
		releaseAt: integer('release_at', { mode: 'timestamp_ms' }),
		createdAt: integer('created_at', { mode: 'timestamp_ms' }).notNull(),
		sentAt: integer('sent_at', { mode: 'timestamp_ms' })
	},
	(t) => [index('notification_outbox_waiting_idx').on(t.sentAt, t.userId, t.createdAt)]
);

export type User = typeof user.$inferSelect;
export type Session = typeof session.$inferSelect;
export type Invitation = typeof invitation.$inferSelect;
export type PasswordReset = typeof passwordReset.$inferSelect;
export type Team = typeof team.$inferSelect;
export type Telescope = typeof telescope.$inferSelect;
export type NewTelescope = typeof telescope.$inferInsert;
export type ApiToken = typeof apiToken.$inferSelect;
export type EventLogEntry = typeof eventLog.$inferSelect;

// ───────────────────────────── Alerts: events, notices, sky maps ─────────────────────────────

export const EVENT_STATES = ['active', 'retracted', 'closed'] as const;
export const NOTICE_KINDS = ['preliminary', 'initial', 'update', 'retraction', 'followup'] as const;
export const NOTICE_ROLES = ['observation', 'test', 'utility'] as const;

/** Raw notices as they arrived, before anything else: the ack waits for this row. */
export const noticeInbox = sqliteTable(
	'notice_inbox',
	{
		id: integer('id').primaryKey({ autoIncrement: true }),
		/** From the XML; a malformed notice gets a synthetic key so that its raw text is still kept. */
		ivorn: text('ivorn').notNull().unique(),
		/** The notice as received, whatever its format (the column's name predates JSON notices). */
		rawXml: text('raw_xml').notNull(),
		/** Which reader the raw text needs: VOEvent XML or a JSON notice (src/lib/alerts/notice-json.ts). */
		format: text('format', { enum: ['voevent', 'json'] }).notNull().default('voevent'),
		via: text('via', { enum: ['vtp', 'api', 'upload', 'backfill'] }).notNull(),
		receivedAt: integer('received_at', { mode: 'timestamp_ms' }).notNull(),
		processedAt: integer('processed_at', { mode: 'timestamp_ms' }),
		attempts: integer('attempts').notNull().default(0),
		/** Why processing failed (malformed, sky map unreachable …); null when fine. */
		error: text('error'),
		/** Uploaded sky-map file stored beside the notice (upload page), if any. */
		uploadedSkymapPath: text('uploaded_skymap_path')
	},
	(t) => [index('notice_inbox_pending_idx').on(t.processedAt)]
);

export type { Classification, TriageVerdict };

export const gwEvent = sqliteTable(
	'gw_event',
	{
		id: text('id').primaryKey(),
		sourceEventId: text('source_event_id').notNull().unique(),
		state: text('state', { enum: EVENT_STATES }).notNull().default('active'),
		role: text('role', { enum: NOTICE_ROLES }).notNull(),
		eventTime: integer('event_time', { mode: 'timestamp_ms' }),
		/** The notice whose content the event shows now (latest by its own authored time). */
		latestNoticeId: text('latest_notice_id'),
		latestKind: text('latest_kind', { enum: NOTICE_KINDS }),
		farHz: real('far_hz'),
		classification: text('classification', { mode: 'json' }).$type<Classification>(),
		properties: text('properties', { mode: 'json' }).$type<Record<string, number | boolean | null>>(),
		latestSkymapId: text('latest_skymap_id'),
		/**
		 * The galaxy catalogue this event's galaxies are ranked against: the one in use when the event
		 * arrived, until a coordinator switches it (a new import does not re-rank events under way).
		 */
		catalogId: text('catalog_id').references(() => catalog.id, { onDelete: 'set null' }),
		triage: text('triage', { mode: 'json' }).$type<TriageVerdict>(),
		retractedAt: integer('retracted_at', { mode: 'timestamp_ms' }),
		/** While closed: when, why, the closer's note and who (cleared on reopening; the event log keeps the history). */
		closedAt: integer('closed_at', { mode: 'timestamp_ms' }),
		closeReason: text('close_reason', { enum: CLOSE_REASONS }),
		closeNote: text('close_note'),
		closedBy: text('closed_by').references(() => user.id, { onDelete: 'set null' }),
		createdAt: createdAt(),
		updatedAt: integer('updated_at', { mode: 'timestamp_ms' })
	},
	(t) => [index('gw_event_state_idx').on(t.state, t.createdAt)]
);

export const notice = sqliteTable(
	'notice',
	{
		id: text('id').primaryKey(),
		eventId: text('event_id')
			.notNull()
			.references(() => gwEvent.id, { onDelete: 'cascade' }),
		inboxId: integer('inbox_id').references(() => noticeInbox.id, { onDelete: 'set null' }),
		ivorn: text('ivorn').notNull().unique(),
		kind: text('kind', { enum: NOTICE_KINDS }).notNull(),
		role: text('role', { enum: NOTICE_ROLES }).notNull(),
		authoredAt: integer('authored_at', { mode: 'timestamp_ms' }).notNull(),
		farHz: real('far_hz'),
		classification: text('classification', { mode: 'json' }).$type<Classification>(),
		properties: text('properties', { mode: 'json' }).$type<Record<string, number | boolean | null>>(),
		skymapUrl: text('skymap_url'),
		citations: text('citations', { mode: 'json' }).$type<{ ivorn: string; cite: string }[]>().notNull(),
		/** IVORN of the notice this one supersedes (from its citations), when given. */
		supersedesIvorn: text('supersedes_ivorn'),
		/** The parsed notice as the parser returned it. */
		parsed: text('parsed', { mode: 'json' }).$type<Record<string, unknown>>().notNull(),
		createdAt: createdAt()
	},
	(t) => [index('notice_event_idx').on(t.eventId, t.authoredAt)]
);

/**
 * A notice stream's vocabulary (which Params carry which field, the FAR unit, the event-id rule),
 * keyed by the stream: the IVORN before "#". A stream without a row is read with the defaults.
 */
export const noticeStream = sqliteTable('notice_stream', {
	stream: text('stream').primaryKey(),
	vocabulary: text('vocabulary', { mode: 'json' }).$type<NoticeVocabulary>().notNull(),
	updatedBy: text('updated_by').references(() => user.id, { onDelete: 'set null' }),
	updatedAt: integer('updated_at', { mode: 'timestamp_ms' }).notNull()
});

export type NoticeStreamRow = typeof noticeStream.$inferSelect;

export type { SkymapSummary };

export const skymap = sqliteTable(
	'skymap',
	{
		id: text('id').primaryKey(),
		eventId: text('event_id')
			.notNull()
			.references(() => gwEvent.id, { onDelete: 'cascade' }),
		noticeId: text('notice_id')
			.notNull()
			.references(() => notice.id, { onDelete: 'cascade' }),
		sourceUrl: text('source_url'),
		/** Path of the stored file, relative to the storage folder. */
		filePath: text('file_path'),
		bytes: integer('bytes'),
		sha256: text('sha256'),
		summary: text('summary', { mode: 'json' }).$type<SkymapSummary>(),
		/** Display raster and contours for the sky view (computed once). */
		display: text('display', { mode: 'json' }).$type<Record<string, unknown>>(),
		/** Why the map could not be fetched or read; null when analysed. */
		error: text('error'),
		/** Download attempts so far (a timeout, a network error or an HTTP error is tried again). */
		fetchAttempts: integer('fetch_attempts').notNull().default(0),
		/** When to try the download again; null when analysed, refused for good, or given up. */
		retryAt: integer('retry_at', { mode: 'timestamp_ms' }),
		createdAt: createdAt()
	},
	(t) => [index('skymap_event_idx').on(t.eventId), index('skymap_retry_idx').on(t.retryAt)]
);

// ───────────────────────────── Triage, shifts, acknowledgement ─────────────────────────────

/** The coordinators' follow-up policy (one row, id = 1). */
export const triagePolicy = sqliteTable('triage_policy', {
	id: integer('id').primaryKey(),
	maxFarPerYear: real('max_far_per_year').notNull().default(12),
	minProbNS: real('min_prob_ns').notNull().default(0.1),
	maxArea90Deg2: real('max_area90_deg2').notNull().default(2000),
	maxDistanceMpc: real('max_distance_mpc').notNull().default(400),
	requireObservationRole: integer('require_observation_role', { mode: 'boolean' }).notNull().default(true),
	/** Minutes before an unacknowledged page goes to the next person on the roster. */
	escalateAfterMin: real('escalate_after_min').notNull().default(10),
	updatedBy: text('updated_by').references(() => user.id, { onDelete: 'set null' }),
	updatedAt: integer('updated_at', { mode: 'timestamp_ms' })
});

/** The duty roster: who is on shift when, in escalation order (rank 0 first). */
export const dutyShift = sqliteTable(
	'duty_shift',
	{
		id: text('id').primaryKey(),
		userId: text('user_id')
			.notNull()
			.references(() => user.id, { onDelete: 'cascade' }),
		startsAt: integer('starts_at', { mode: 'timestamp_ms' }).notNull(),
		endsAt: integer('ends_at', { mode: 'timestamp_ms' }).notNull(),
		rank: integer('rank').notNull().default(0),
		handoverNote: text('handover_note').notNull().default(''),
		createdAt: createdAt()
	},
	(t) => [index('duty_shift_time_idx').on(t.startsAt, t.endsAt), check('duty_shift_order', sql`${t.endsAt} > ${t.startsAt}`)]
);

/** A request to acknowledge a significant notice, sent to one person; escalation adds the next. */
export const dutyPage = sqliteTable(
	'duty_page',
	{
		id: text('id').primaryKey(),
		eventId: text('event_id')
			.notNull()
			.references(() => gwEvent.id, { onDelete: 'cascade' }),
		noticeId: text('notice_id')
			.notNull()
			.references(() => notice.id, { onDelete: 'cascade' }),
		userId: text('user_id')
			.notNull()
			.references(() => user.id, { onDelete: 'cascade' }),
		level: integer('level').notNull().default(0),
		sentAt: integer('sent_at', { mode: 'timestamp_ms' }).notNull(),
		escalatedAt: integer('escalated_at', { mode: 'timestamp_ms' }),
		acknowledgedAt: integer('acknowledged_at', { mode: 'timestamp_ms' }),
		acknowledgedBy: text('acknowledged_by').references(() => user.id, { onDelete: 'set null' }),
		/** Seconds from the notice reaching the inbox to the acknowledgement. */
		latencyS: real('latency_s')
	},
	(t) => [index('duty_page_event_idx').on(t.eventId), index('duty_page_open_idx').on(t.acknowledgedAt)]
);

/** A person's phone number for pages (E.164) and how each kind of notification reaches them. */
export const phoneContact = sqliteTable('phone_contact', {
	userId: text('user_id')
		.primaryKey()
		.references(() => user.id, { onDelete: 'cascade' }),
	/** The verified number, or null. */
	number: text('number'),
	verifiedAt: integer('verified_at', { mode: 'timestamp_ms' }),
	/** A number waiting for its code, the code's SHA-256 (hex), when it expires and how often it was tried. */
	pendingNumber: text('pending_number'),
	codeHash: text('code_hash'),
	codeExpiresAt: integer('code_expires_at', { mode: 'timestamp_ms' }),
	codeTries: integer('code_tries').notNull().default(0),
	/** kind → channels; a kind not listed goes by e-mail only. */
	channels: text('channels', { mode: 'json' }).$type<ChannelChoices>().notNull(),
	updatedAt: integer('updated_at', { mode: 'timestamp_ms' }).notNull()
});

export const PAGE_MESSAGE_STATES = ['queued', 'sent', 'failed'] as const;

/**
 * One page (or stand-down) to one person by one channel: the outbox the sender drains. A failed
 * try is retried with back-off until `PAGE_SEND_MAX_ATTEMPTS`; then it stays 'failed', in view.
 */
export const pageMessage = sqliteTable(
	'page_message',
	{
		id: text('id').primaryKey(),
		eventId: text('event_id')
			.notNull()
			.references(() => gwEvent.id, { onDelete: 'cascade' }),
		/** The duty page this message carries; null for a stand-down. */
		pageId: text('page_id').references(() => dutyPage.id, { onDelete: 'cascade' }),
		userId: text('user_id')
			.notNull()
			.references(() => user.id, { onDelete: 'cascade' }),
		kind: text('kind', { enum: NOTIFICATION_KINDS }).notNull(),
		channel: text('channel', { enum: CHANNELS }).notNull(),
		/** E-mail address or E.164 number, as it was when queued. */
		address: text('address').notNull(),
		subject: text('subject').notNull(),
		body: text('body').notNull(),
		status: text('status', { enum: PAGE_MESSAGE_STATES }).notNull().default('queued'),
		attempts: integer('attempts').notNull().default(0),
		nextAttemptAt: integer('next_attempt_at', { mode: 'timestamp_ms' }),
		lastError: text('last_error'),
		/** The messaging service's id of the message or call. */
		providerRef: text('provider_ref'),
		createdAt: integer('created_at', { mode: 'timestamp_ms' }).notNull(),
		sentAt: integer('sent_at', { mode: 'timestamp_ms' })
	},
	(t) => [index('page_message_due_idx').on(t.status, t.nextAttemptAt), index('page_message_page_idx').on(t.pageId)]
);

/**
 * The one-time acknowledgement of one page: the link's single use and the short code a text reply
 * may carry. The link itself is signed (duty/ack-links.ts); this row makes it single-use.
 */
export const pageAck = sqliteTable(
	'page_ack',
	{
		pageId: text('page_id')
			.primaryKey()
			.references(() => dutyPage.id, { onDelete: 'cascade' }),
		userId: text('user_id')
			.notNull()
			.references(() => user.id, { onDelete: 'cascade' }),
		/** Short reply code ("K7Q4M2"), unique among the codes of one person. */
		code: text('code').notNull(),
		expiresAt: integer('expires_at', { mode: 'timestamp_ms' }).notNull(),
		usedAt: integer('used_at', { mode: 'timestamp_ms' })
	},
	(t) => [uniqueIndex('page_ack_user_code_idx').on(t.userId, t.code)]
);

export type PhoneContact = typeof phoneContact.$inferSelect;
export type PageMessage = typeof pageMessage.$inferSelect;
export type PageAck = typeof pageAck.$inferSelect;

export type GwEvent = typeof gwEvent.$inferSelect;
export type Notice = typeof notice.$inferSelect;
export type NoticeInboxRow = typeof noticeInbox.$inferSelect;
export type Skymap = typeof skymap.$inferSelect;
export type TriagePolicy = typeof triagePolicy.$inferSelect;
export type DutyShift = typeof dutyShift.$inferSelect;
export type DutyPage = typeof dutyPage.$inferSelect;

// ───────────────────────────── Targets: galaxy catalogues, rankings, survey fields ─────────────────────────────

export const CATALOG_STATES = ['importing', 'ready', 'failed'] as const;

/** Rejected-row report of an import: the first rows listed, all counted. */
export interface CatalogImportReport {
	rowsSeen: number;
	rejectedCount: number;
	rejected: { line: number; reason: string }[];
	fatal: string | null;
	bytes: number;
}

/** One imported galaxy catalogue (its rows are in `galaxy`). */
export const catalog = sqliteTable(
	'catalog',
	{
		id: text('id').primaryKey(),
		name: text('name').notNull(),
		sourceNote: text('source_note').notNull().default(''),
		/** Invented galaxies (the demo's and the tests'): always shown as such. */
		synthetic: integer('synthetic', { mode: 'boolean' }).notNull().default(false),
		rowCount: integer('row_count').notNull().default(0),
		/** Catalogue field → CSV header used by the import. */
		columns: text('columns', { mode: 'json' }).$type<Record<string, string>>().notNull(),
		/** Where the galaxy weight came from: 'weight' | 'b' | 'k' | 'mass' | 'none'. */
		weightSource: text('weight_source').notNull().default('none'),
		report: text('report', { mode: 'json' }).$type<CatalogImportReport>(),
		state: text('state', { enum: CATALOG_STATES }).notNull().default('importing'),
		error: text('error'),
		createdBy: text('created_by').references(() => user.id, { onDelete: 'set null' }),
		createdAt: createdAt(),
		readyAt: integer('ready_at', { mode: 'timestamp_ms' })
	},
	(t) => [index('catalog_state_idx').on(t.state, t.createdAt)]
);

/** Galaxies, with their HEALPix NESTED pixel at the targeting index order (INDEX_ORDER = 8). */
export const galaxy = sqliteTable(
	'galaxy',
	{
		/** SQLite rowid: the galaxy's id everywhere else. */
		id: integer('id').primaryKey(),
		catalogId: text('catalog_id')
			.notNull()
			.references(() => catalog.id, { onDelete: 'cascade' }),
		/** 0-based position in the catalogue file (the CatalogIndex row). */
		row: integer('row').notNull(),
		name: text('name').notNull(),
		raDeg: real('ra_deg').notNull(),
		decDeg: real('dec_deg').notNull(),
		distanceMpc: real('distance_mpc').notNull(),
		distanceErrMpc: real('distance_err_mpc').notNull(),
		weight: real('weight').notNull(),
		/** Absolute B magnitude when the catalogue gives one (directly or from the apparent one). */
		bAbsMag: real('b_abs_mag'),
		pixel: integer('pixel').notNull()
	},
	// No index on (catalog_id, pixel): nothing looks galaxies up by pixel (rankings read a catalogue
	// in row order into memory), and rows arrive in random pixel order, so such an index made every
	// commit of a catalogue import rewrite pages all over its b-tree (12–27 ms per commit, growing).
	(t) => [index('galaxy_catalog_row_idx').on(t.catalogId, t.row)]
);

/** Ranked galaxies of an event's current sky map (replaced when a new map arrives). */
export const eventGalaxy = sqliteTable(
	'event_galaxy',
	{
		eventId: text('event_id')
			.notNull()
			.references(() => gwEvent.id, { onDelete: 'cascade' }),
		skymapId: text('skymap_id')
			.notNull()
			.references(() => skymap.id, { onDelete: 'cascade' }),
		rank: integer('rank').notNull(),
		galaxyId: integer('galaxy_id')
			.notNull()
			.references(() => galaxy.id, { onDelete: 'cascade' }),
		score: real('score').notNull(),
		probability: real('probability').notNull(),
		cumulative: real('cumulative').notNull(),
		/** Two-sided tail probability of the catalogued distance under the map's distance posterior in its pixel; null for a 2-D map. */
		distancePValue: real('distance_p_value')
	},
	(t) => [primaryKey({ columns: [t.eventId, t.rank] }), index('event_galaxy_event_idx').on(t.eventId)]
);

/** Ranked survey fields per wide-field telescope for an event's current sky map. */
export const eventField = sqliteTable(
	'event_field',
	{
		eventId: text('event_id')
			.notNull()
			.references(() => gwEvent.id, { onDelete: 'cascade' }),
		skymapId: text('skymap_id')
			.notNull()
			.references(() => skymap.id, { onDelete: 'cascade' }),
		telescopeId: text('telescope_id')
			.notNull()
			.references(() => telescope.id, { onDelete: 'cascade' }),
		fieldId: text('field_id').notNull(),
		raDeg: real('ra_deg').notNull(),
		decDeg: real('dec_deg').notNull(),
		probability: real('probability').notNull(),
		cumulative: real('cumulative').notNull(),
		rank: integer('rank').notNull()
	},
	(t) => [primaryKey({ columns: [t.eventId, t.telescopeId, t.rank] }), index('event_field_event_idx').on(t.eventId)]
);

export interface TargetsMetaCompleteness {
	distanceRangeMpc: [number, number];
	ratio: number;
	catalogLuminosityB10: number;
	expectedLuminosityB10: number;
}

/** What the last ranking of an event used and found. */
export const eventTargetsMeta = sqliteTable('event_targets_meta', {
	eventId: text('event_id')
		.primaryKey()
		.references(() => gwEvent.id, { onDelete: 'cascade' }),
	skymapId: text('skymap_id')
		.notNull()
		.references(() => skymap.id, { onDelete: 'cascade' }),
	catalogId: text('catalog_id').references(() => catalog.id, { onDelete: 'set null' }),
	mode: text('mode'),
	level: real('level').notNull(),
	regionAreaDeg2: real('region_area_deg2'),
	candidates: integer('candidates').notNull().default(0),
	galaxiesStored: integer('galaxies_stored').notNull().default(0),
	withoutDistance: integer('without_distance').notNull().default(0),
	completeness: text('completeness', { mode: 'json' }).$type<TargetsMetaCompleteness>(),
	/** telescopeId → number of fields stored. */
	fieldCounts: text('field_counts', { mode: 'json' }).$type<Record<string, number>>().notNull(),
	computeMs: real('compute_ms'),
	computedAt: integer('computed_at', { mode: 'timestamp_ms' }).notNull()
});

/**
 * The ranks, before the last re-ranking, of the targets that open claims held then (the ranking
 * tables keep the current map only). Written with each ranking, in the same transaction;
 * `telescopeId` is '' for galaxies, which are ranked for every telescope alike.
 */
export const rankSnapshot = sqliteTable(
	'rank_snapshot',
	{
		eventId: text('event_id')
			.notNull()
			.references(() => gwEvent.id, { onDelete: 'cascade' }),
		targetKind: text('target_kind', { enum: ['galaxy', 'field'] }).notNull(),
		telescopeId: text('telescope_id').notNull(),
		targetId: text('target_id').notNull(),
		/** The map and catalogue of the ranking these ranks come from. */
		fromSkymapId: text('from_skymap_id').notNull(),
		fromCatalogId: text('from_catalog_id'),
		rank: integer('rank').notNull(),
		probability: real('probability').notNull()
	},
	(t) => [primaryKey({ columns: [t.eventId, t.targetKind, t.telescopeId, t.targetId] })]
);

export type Catalog = typeof catalog.$inferSelect;
export type Galaxy = typeof galaxy.$inferSelect;
export type EventGalaxy = typeof eventGalaxy.$inferSelect;
export type EventField = typeof eventField.$inferSelect;
export type EventTargetsMeta = typeof eventTargetsMeta.$inferSelect;

// ───────────────────────────── Claims and reported observations ─────────────────────────────

export const CLAIM_TARGET_KINDS = ['galaxy', 'field'] as const;
export const CLAIM_STATES = ['claimed', 'observing', 'done', 'released', 'lapsed'] as const;
/** States that hold the target: at most one such claim per target, filter and epoch. */
export const OPEN_CLAIM_STATES = ['claimed', 'observing'] as const;
export const OBSERVATION_SOURCES = ['form', 'csv', 'api'] as const;

/** A team's promise to observe one target of an event with one telescope. */
export const claim = sqliteTable(
	'claim',
	{
		id: text('id').primaryKey(),
		eventId: text('event_id')
			.notNull()
			.references(() => gwEvent.id, { onDelete: 'cascade' }),
		targetKind: text('target_kind', { enum: CLAIM_TARGET_KINDS }).notNull(),
		/** Galaxy row id (as text) or survey field id. */
		targetId: text('target_id').notNull(),
		/** '' = any filter. */
		filter: text('filter').notNull().default(''),
		epoch: integer('epoch').notNull().default(1),
		telescopeId: text('telescope_id')
			.notNull()
			.references(() => telescope.id, { onDelete: 'cascade' }),
		teamId: text('team_id')
			.notNull()
			.references(() => team.id, { onDelete: 'cascade' }),
		userId: text('user_id').references(() => user.id, { onDelete: 'set null' }),
		state: text('state', { enum: CLAIM_STATES }).notNull().default('claimed'),
		claimedAt: integer('claimed_at', { mode: 'timestamp_ms' }).notNull(),
		startedAt: integer('started_at', { mode: 'timestamp_ms' }),
		doneAt: integer('done_at', { mode: 'timestamp_ms' }),
		/** When it was released or lapsed. */
		endedAt: integer('ended_at', { mode: 'timestamp_ms' }),
		note: text('note').notNull().default('')
	},
	(t) => [
		// The server's arbiter between two teams pressing at once: the second insert fails here.
		uniqueIndex('claim_open_target_uq')
			.on(t.eventId, t.targetKind, t.targetId, t.filter, t.epoch)
			.where(sql`state IN ('claimed', 'observing')`),
		index('claim_event_idx').on(t.eventId, t.state),
		index('claim_state_idx').on(t.state, t.claimedAt),
		check('claim_epoch', sql`${t.epoch} >= 1`)
	]
);

/** A pointing a team reports: by form, CSV upload or a robotic telescope's token. */
export const observation = sqliteTable(
	'observation',
	{
		id: text('id').primaryKey(),
		eventId: text('event_id')
			.notNull()
			.references(() => gwEvent.id, { onDelete: 'cascade' }),
		telescopeId: text('telescope_id')
			.notNull()
			.references(() => telescope.id, { onDelete: 'cascade' }),
		teamId: text('team_id')
			.notNull()
			.references(() => team.id, { onDelete: 'cascade' }),
		reportedByUserId: text('reported_by_user_id').references(() => user.id, { onDelete: 'set null' }),
		reportedByTokenId: text('reported_by_token_id').references(() => apiToken.id, { onDelete: 'set null' }),
		observedAt: integer('observed_at', { mode: 'timestamp_ms' }).notNull(),
		raDeg: real('ra_deg').notNull(),
		decDeg: real('dec_deg').notNull(),
		fieldId: text('field_id'),
		filter: text('filter').notNull(),
		exposureS: real('exposure_s').notNull(),
		limitingMag: real('limiting_mag').notNull(),
		seeingArcsec: real('seeing_arcsec'),
		notes: text('notes').notNull().default(''),
		source: text('source', { enum: OBSERVATION_SOURCES }).notNull(),
		/** The first claim this pointing completed, if any (all of them are in the log entry). */
		claimId: text('claim_id').references(() => claim.id, { onDelete: 'set null' }),
		createdAt: createdAt()
	},
	(t) => [
		index('observation_event_idx').on(t.eventId, t.observedAt),
		// The replay's clock: pointings by when they were reported (sky-replay.ts).
		index('observation_event_recorded_idx').on(t.eventId, t.createdAt),
		check('observation_ra', sql`${t.raDeg} >= 0 AND ${t.raDeg} < 360`),
		check('observation_dec', sql`${t.decDeg} BETWEEN -90 AND 90`),
		check('observation_exposure', sql`${t.exposureS} > 0`)
	]
);

/** Claim rules per event, or global when `scope` = 'global' (else the event id). */
export const claimSetting = sqliteTable('claim_setting', {
	scope: text('scope').primaryKey(),
	/** Minutes a claim may stay 'claimed' without being started before it lapses. */
	lapseMinutes: real('lapse_minutes').notNull().default(60),
	updatedBy: text('updated_by').references(() => user.id, { onDelete: 'set null' }),
	updatedAt: integer('updated_at', { mode: 'timestamp_ms' })
});

export type Claim = typeof claim.$inferSelect;
export type ClaimState = (typeof CLAIM_STATES)[number];
export type Observation = typeof observation.$inferSelect;
export type ClaimSetting = typeof claimSetting.$inferSelect;

// ───────────────────────────── Transient candidates ─────────────────────────────

/** A transient a team found in its images during an event (classification comes later, from spectra). */
export const candidate = sqliteTable(
	'candidate',
	{
		id: text('id').primaryKey(),
		eventId: text('event_id')
			.notNull()
			.references(() => gwEvent.id, { onDelete: 'cascade' }),
		/** The team's designation, unique per event regardless of case ('AT-1' and 'at-1' are one name). */
		name: text('name').notNull(),
		raDeg: real('ra_deg').notNull(),
		decDeg: real('dec_deg').notNull(),
		/** Radius of the position's uncertainty as the team states it, arcsec; null when none was given. */
		positionErrArcsec: real('position_err_arcsec'),
		discoveredAt: integer('discovered_at', { mode: 'timestamp_ms' }).notNull(),
		/** AB magnitude at discovery. */
		magnitude: real('magnitude').notNull(),
		magnitudeErr: real('magnitude_err'),
		filter: text('filter').notNull(),
		telescopeId: text('telescope_id').references(() => telescope.id, { onDelete: 'set null' }),
		teamId: text('team_id')
			.notNull()
			.references(() => team.id, { onDelete: 'cascade' }),
		reportedByUserId: text('reported_by_user_id').references(() => user.id, { onDelete: 'set null' }),
		reportedByTokenId: text('reported_by_token_id').references(() => apiToken.id, { onDelete: 'set null' }),
		notes: text('notes').notNull().default(''),
		/** The label every current classification agrees on, 'disputed' when they disagree, null before any. */
		classification: text('classification'),
		/** Where the candidate stands: open, rejected (with a reason) or promoted for a spectrum; history in candidate_decision. */
		state: text('state', { enum: CANDIDATE_STATES }).notNull().default('open'),
		createdAt: createdAt()
	},
	(t) => [
		uniqueIndex('candidate_event_name_uq').on(t.eventId, sql`lower(${t.name})`),
		index('candidate_event_idx').on(t.eventId, t.createdAt),
		index('candidate_created_idx').on(t.createdAt),
		check('candidate_ra', sql`${t.raDeg} >= 0 AND ${t.raDeg} < 360`),
		check('candidate_dec', sql`${t.decDeg} BETWEEN -90 AND 90`),
		check('candidate_mag', sql`${t.magnitude} BETWEEN 5 AND 30`),
		check('candidate_mag_err', sql`${t.magnitudeErr} IS NULL OR ${t.magnitudeErr} >= 0`)
	]
);

export type Candidate = typeof candidate.$inferSelect;

export const PHOTOMETRY_SOURCES = ['json', 'csv', 'form'] as const;
export const SPECTRUM_TAKE_STATES = ['taken', 'released', 'done'] as const;
export type SpectrumTakeState = (typeof SPECTRUM_TAKE_STATES)[number];

/** One measurement of a candidate: a detection (mag, mag_err) or an upper limit (limit_mag). */
export const candidatePhotometry = sqliteTable(
	'candidate_photometry',
	{
		id: text('id').primaryKey(),
		candidateId: text('candidate_id')
			.notNull()
			.references(() => candidate.id, { onDelete: 'cascade' }),
		observedAt: integer('observed_at', { mode: 'timestamp_ms' }).notNull(),
		filter: text('filter').notNull(),
		mag: real('mag'),
		magErr: real('mag_err'),
		limitMag: real('limit_mag'),
		/** The reported pointing the measurement was made on, when the reporter names it. */
		observationId: text('observation_id').references(() => observation.id, { onDelete: 'set null' }),
		reportedByUserId: text('reported_by_user_id').references(() => user.id, { onDelete: 'set null' }),
		reportedByTokenId: text('reported_by_token_id').references(() => apiToken.id, { onDelete: 'set null' }),
		source: text('source', { enum: PHOTOMETRY_SOURCES }).notNull(),
		createdAt: createdAt()
	},
	(t) => [
		// One measurement per filter and instant: a second upload of the same file is refused, not doubled.
		uniqueIndex('candidate_photometry_uq').on(t.candidateId, t.filter, t.observedAt),
		check('candidate_photometry_kind', sql`${t.mag} IS NOT NULL OR ${t.limitMag} IS NOT NULL`),
		check('candidate_photometry_err', sql`${t.mag} IS NULL OR ${t.magErr} > 0`)
	]
);

/** A 1-D spectrum file of a candidate, read and summarised before it was stored. */
export const candidateSpectrum = sqliteTable(
	'candidate_spectrum',
	{
		id: text('id').primaryKey(),
		candidateId: text('candidate_id')
			.notNull()
			.references(() => candidate.id, { onDelete: 'cascade' }),
		/** Relative to the storage folder (never under static/). */
		filePath: text('file_path').notNull(),
		originalName: text('original_name').notNull(),
		bytes: integer('bytes').notNull(),
		sha256: text('sha256').notNull(),
		format: text('format').$type<SpectrumFormat>().notNull(),
		summary: text('summary', { mode: 'json' }).$type<SpectrumSummary>().notNull(),
		notes: text('notes').notNull().default(''),
		uploadedByUserId: text('uploaded_by_user_id').references(() => user.id, { onDelete: 'set null' }),
		createdAt: createdAt()
	},
	(t) => [index('candidate_spectrum_idx').on(t.candidateId, t.createdAt)]
);

/** Who is getting a spectrum of a candidate: at most one open take per candidate (the index decides). */
export const spectrumTake = sqliteTable(
	'spectrum_take',
	{
		id: text('id').primaryKey(),
		candidateId: text('candidate_id')
			.notNull()
			.references(() => candidate.id, { onDelete: 'cascade' }),
		userId: text('user_id')
			.notNull()
			.references(() => user.id, { onDelete: 'cascade' }),
		state: text('state', { enum: SPECTRUM_TAKE_STATES }).notNull().default('taken'),
		/** Instrument, night, expected time: whatever helps others plan. */
		note: text('note').notNull().default(''),
		takenAt: integer('taken_at', { mode: 'timestamp_ms' }).notNull(),
		endedAt: integer('ended_at', { mode: 'timestamp_ms' })
	},
	(t) => [uniqueIndex('spectrum_take_open_uq').on(t.candidateId).where(sql`state = 'taken'`), index('spectrum_take_candidate_idx').on(t.candidateId, t.takenAt)]
);

/** One person's verdict on what a candidate is. Several may disagree; each author's latest counts. */
export const candidateClassification = sqliteTable(
	'candidate_classification',
	{
		id: text('id').primaryKey(),
		candidateId: text('candidate_id')
			.notNull()
			.references(() => candidate.id, { onDelete: 'cascade' }),
		label: text('label', { enum: CLASSIFICATION_LABELS }).notNull(),
		confidence: text('confidence', { enum: CONFIDENCE_LEVELS }).notNull(),
		redshift: real('redshift'),
		notes: text('notes').notNull().default(''),
		/** The spectrum it rests on, when named. */
		spectrumId: text('spectrum_id').references(() => candidateSpectrum.id, { onDelete: 'set null' }),
		authorUserId: text('author_user_id').references(() => user.id, { onDelete: 'set null' }),
		createdAt: createdAt()
	},
	(t) => [index('candidate_classification_idx').on(t.candidateId, t.createdAt), check('candidate_classification_z', sql`${t.redshift} IS NULL OR ${t.redshift} BETWEEN -0.01 AND 10`)]
);

/** A person setting a candidate's state, with the reason: its history, newest last. */
export const candidateDecision = sqliteTable(
	'candidate_decision',
	{
		id: text('id').primaryKey(),
		candidateId: text('candidate_id')
			.notNull()
			.references(() => candidate.id, { onDelete: 'cascade' }),
		state: text('state', { enum: CANDIDATE_STATES }).notNull(),
		/** Required for 'rejected'. */
		reason: text('reason', { enum: REJECTION_REASONS }),
		note: text('note').notNull().default(''),
		userId: text('user_id').references(() => user.id, { onDelete: 'set null' }),
		createdAt: createdAt()
	},
	(t) => [
		index('candidate_decision_idx').on(t.candidateId, t.createdAt),
		check('candidate_decision_reason', sql`(${t.state} = 'rejected') = (${t.reason} IS NOT NULL)`)
	]
);

/** The discussion thread of a candidate. */
export const candidateComment = sqliteTable(
	'candidate_comment',
	{
		id: text('id').primaryKey(),
		candidateId: text('candidate_id')
			.notNull()
			.references(() => candidate.id, { onDelete: 'cascade' }),
		userId: text('user_id').references(() => user.id, { onDelete: 'set null' }),
		body: text('body').notNull(),
		createdAt: createdAt()
	},
	(t) => [index('candidate_comment_idx').on(t.candidateId, t.createdAt)]
);

/** The coordinators' changes to the kilonova-likeness thresholds (one row, id = 1); the rest are the defaults in code. */
export const kilonovaRules = sqliteTable('kilonova_rules', {
	id: integer('id').primaryKey(),
	changes: text('changes', { mode: 'json' }).$type<ThresholdChanges>().notNull(),
	updatedBy: text('updated_by').references(() => user.id, { onDelete: 'set null' }),
	updatedAt: integer('updated_at', { mode: 'timestamp_ms' }).notNull()
});

/** The latest vetting of a candidate, recomputed when its inputs change (`inputs_key` names them). */
export const candidateVetting = sqliteTable('candidate_vetting', {
	candidateId: text('candidate_id')
		.primaryKey()
		.references(() => candidate.id, { onDelete: 'cascade' }),
	inputsKey: text('inputs_key').notNull(),
	vetting: text('vetting', { mode: 'json' }).$type<CandidateVetting>().notNull(),
	verdict: text('verdict').$type<KilonovaVerdict>().notNull(),
	computedAt: integer('computed_at', { mode: 'timestamp_ms' }).notNull(),
	/** When the rules first called it kilonova-like; the announcement goes out once, guarded on this. */
	kilonovaLikeAt: integer('kilonova_like_at', { mode: 'timestamp_ms' })
});

export type CandidatePhotometry = typeof candidatePhotometry.$inferSelect;
export type CandidateSpectrum = typeof candidateSpectrum.$inferSelect;
export type SpectrumTake = typeof spectrumTake.$inferSelect;
export type CandidateClassification = typeof candidateClassification.$inferSelect;
export type CandidateDecision = typeof candidateDecision.$inferSelect;
export type CandidateComment = typeof candidateComment.$inferSelect;
export type KilonovaRules = typeof kilonovaRules.$inferSelect;
export type CandidateVettingRow = typeof candidateVetting.$inferSelect;
export type NotificationPreference = typeof notificationPreference.$inferSelect;
export type NotificationOutboxRow = typeof notificationOutbox.$inferSelect;
export type RankSnapshot = typeof rankSnapshot.$inferSelect;


// ───────────────────────────── Close-out: the event record ─────────────────────────────

/** The coordinator's note on an event's record, shown in every rendering of its report. */
export const eventRecordNote = sqliteTable('event_record_note', {
	eventId: text('event_id')
		.primaryKey()
		.references(() => gwEvent.id, { onDelete: 'cascade' }),
	text: text('text').notNull(),
	updatedBy: text('updated_by').references(() => user.id, { onDelete: 'set null' }),
	updatedAt: integer('updated_at', { mode: 'timestamp_ms' }).notNull()
});

/** Collaboration-wide settings (one row, id = 1). */
export const collaborationSetting = sqliteTable('collaboration_setting', {
	id: integer('id').primaryKey(),
	/** Where event reports are e-mailed when an event is closed; '' = not sent. */
	mailingListAddress: text('mailing_list_address').notNull().default(''),
	updatedBy: text('updated_by').references(() => user.id, { onDelete: 'set null' }),
	updatedAt: integer('updated_at', { mode: 'timestamp_ms' })
});

export type EventRecordNote = typeof eventRecordNote.$inferSelect;
export type CollaborationSetting = typeof collaborationSetting.$inferSelect;

// ───────────────────────────── Chat webhooks and calendar feeds ─────────────────────────────

export const WEBHOOK_DELIVERY_STATES = ['pending', 'delivered', 'failed'] as const;

/** An incoming-webhook address of a team-chat room, and the kinds of message it takes. */
export const chatWebhook = sqliteTable('chat_webhook', {
	id: text('id').primaryKey(),
	name: text('name').notNull(),
	/** The full address; it usually holds the chat product's secret, so pages show it masked. */
	url: text('url').notNull(),
	kinds: text('kinds', { mode: 'json' }).$type<WebhookKind[]>().notNull(),
	createdBy: text('created_by').references(() => user.id, { onDelete: 'set null' }),
	createdAt: createdAt(),
	updatedAt: integer('updated_at', { mode: 'timestamp_ms' })
});

/**
 * One message for one webhook: the outbox. `messageKey` names what the message is about (a notice,
 * an event's first significant alert, a candidate, a test), and the unique index makes sure each
 * webhook gets it once however often the reaction runs.
 */
export const webhookDelivery = sqliteTable(
	'webhook_delivery',
	{
		id: integer('id').primaryKey({ autoIncrement: true }),
		webhookId: text('webhook_id')
			.notNull()
			.references(() => chatWebhook.id, { onDelete: 'cascade' }),
		kind: text('kind', { enum: [...WEBHOOK_KINDS, 'test'] }).notNull(),
		messageKey: text('message_key').notNull(),
		/** The notice a message about an alert came from (so a notice is told once, as new or as an update). */
		noticeId: text('notice_id'),
		body: text('body', { mode: 'json' }).$type<WebhookBody>().notNull(),
		state: text('state', { enum: WEBHOOK_DELIVERY_STATES }).notNull().default('pending'),
		attempts: integer('attempts').notNull().default(0),
		nextAttemptAt: integer('next_attempt_at', { mode: 'timestamp_ms' }),
		lastStatus: integer('last_status'),
		lastError: text('last_error'),
		lastAttemptAt: integer('last_attempt_at', { mode: 'timestamp_ms' }),
		deliveredAt: integer('delivered_at', { mode: 'timestamp_ms' }),
		createdAt: createdAt()
	},
	(t) => [
		uniqueIndex('webhook_delivery_once').on(t.webhookId, t.messageKey),
		index('webhook_delivery_due_idx').on(t.state, t.nextAttemptAt),
		index('webhook_delivery_hook_idx').on(t.webhookId, t.createdAt)
	]
);

export const CALENDAR_FEED_SCOPES = ['mine', 'roster'] as const;

/** A secret calendar address: one person's shifts (`mine`) or the whole roster. The secret is stored hashed. */
export const calendarFeed = sqliteTable(
	'calendar_feed',
	{
		id: text('id').primaryKey(),
		userId: text('user_id')
			.notNull()
			.references(() => user.id, { onDelete: 'cascade' }),
		scope: text('scope', { enum: CALENDAR_FEED_SCOPES }).notNull(),
		/** SHA-256 of the secret, hex. */
		tokenHash: text('token_hash').notNull().unique(),
		prefix: text('prefix').notNull(),
		lastFetchedAt: integer('last_fetched_at', { mode: 'timestamp_ms' }),
		revokedAt: integer('revoked_at', { mode: 'timestamp_ms' }),
		createdAt: createdAt()
	},
	(t) => [uniqueIndex('calendar_feed_live').on(t.userId, t.scope).where(sql`${t.revokedAt} IS NULL`)]
);

export type ChatWebhook = typeof chatWebhook.$inferSelect;
export type WebhookDelivery = typeof webhookDelivery.$inferSelect;
export type CalendarFeed = typeof calendarFeed.$inferSelect;
