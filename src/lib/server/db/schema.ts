import { sql } from 'drizzle-orm';
import { ROLES_LIST } from '../../roles';
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
