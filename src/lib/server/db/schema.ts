import { sql } from 'drizzle-orm';
import { ROLES_LIST } from '../../roles';
import type { SkymapSummary } from '../../sky/index';
import { sqliteTable, text, integer, real, primaryKey, index, check } from 'drizzle-orm/sqlite-core';

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
export const NOTICE_KINDS = ['preliminary', 'initial', 'update', 'retraction'] as const;
export const NOTICE_ROLES = ['observation', 'test', 'utility'] as const;

/** Raw notices as they arrived, before anything else: the ack waits for this row. */
export const noticeInbox = sqliteTable(
	'notice_inbox',
	{
		id: integer('id').primaryKey({ autoIncrement: true }),
		/** From the XML; a malformed notice gets a synthetic key so that its raw text is still kept. */
		ivorn: text('ivorn').notNull().unique(),
		rawXml: text('raw_xml').notNull(),
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
		triage: text('triage', { mode: 'json' }).$type<TriageVerdict>(),
		retractedAt: integer('retracted_at', { mode: 'timestamp_ms' }),
		closedAt: integer('closed_at', { mode: 'timestamp_ms' }),
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
		createdAt: createdAt()
	},
	(t) => [index('skymap_event_idx').on(t.eventId)]
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

export type GwEvent = typeof gwEvent.$inferSelect;
export type Notice = typeof notice.$inferSelect;
export type NoticeInboxRow = typeof noticeInbox.$inferSelect;
export type Skymap = typeof skymap.$inferSelect;
export type TriagePolicy = typeof triagePolicy.$inferSelect;
export type DutyShift = typeof dutyShift.$inferSelect;
export type DutyPage = typeof dutyPage.$inferSelect;
