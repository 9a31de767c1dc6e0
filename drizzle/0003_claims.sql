CREATE TABLE `claim` (
	`id` text PRIMARY KEY NOT NULL,
	`event_id` text NOT NULL,
	`target_kind` text NOT NULL,
	`target_id` text NOT NULL,
	`filter` text DEFAULT '' NOT NULL,
	`epoch` integer DEFAULT 1 NOT NULL,
	`telescope_id` text NOT NULL,
	`team_id` text NOT NULL,
	`user_id` text,
	`state` text DEFAULT 'claimed' NOT NULL,
	`claimed_at` integer NOT NULL,
	`started_at` integer,
	`done_at` integer,
	`ended_at` integer,
	`note` text DEFAULT '' NOT NULL,
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`telescope_id`) REFERENCES `telescope`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`team_id`) REFERENCES `team`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null,
	CONSTRAINT "claim_epoch" CHECK("claim"."epoch" >= 1)
);
--> statement-breakpoint
CREATE UNIQUE INDEX `claim_open_target_uq` ON `claim` (`event_id`,`target_kind`,`target_id`,`filter`,`epoch`) WHERE state IN ('claimed', 'observing');--> statement-breakpoint
CREATE INDEX `claim_event_idx` ON `claim` (`event_id`,`state`);--> statement-breakpoint
CREATE INDEX `claim_state_idx` ON `claim` (`state`,`claimed_at`);--> statement-breakpoint
CREATE TABLE `claim_setting` (
	`scope` text PRIMARY KEY NOT NULL,
	`lapse_minutes` real DEFAULT 60 NOT NULL,
	`updated_by` text,
	`updated_at` integer,
	FOREIGN KEY (`updated_by`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null
);
--> statement-breakpoint
CREATE TABLE `observation` (
	`id` text PRIMARY KEY NOT NULL,
	`event_id` text NOT NULL,
	`telescope_id` text NOT NULL,
	`team_id` text NOT NULL,
	`reported_by_user_id` text,
	`reported_by_token_id` text,
	`observed_at` integer NOT NULL,
	`ra_deg` real NOT NULL,
	`dec_deg` real NOT NULL,
	`field_id` text,
	`filter` text NOT NULL,
	`exposure_s` real NOT NULL,
	`limiting_mag` real NOT NULL,
	`seeing_arcsec` real,
	`notes` text DEFAULT '' NOT NULL,
	`source` text NOT NULL,
	`claim_id` text,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`telescope_id`) REFERENCES `telescope`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`team_id`) REFERENCES `team`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`reported_by_user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null,
	FOREIGN KEY (`reported_by_token_id`) REFERENCES `api_token`(`id`) ON UPDATE no action ON DELETE set null,
	FOREIGN KEY (`claim_id`) REFERENCES `claim`(`id`) ON UPDATE no action ON DELETE set null,
	CONSTRAINT "observation_ra" CHECK("observation"."ra_deg" >= 0 AND "observation"."ra_deg" < 360),
	CONSTRAINT "observation_dec" CHECK("observation"."dec_deg" BETWEEN -90 AND 90),
	CONSTRAINT "observation_exposure" CHECK("observation"."exposure_s" > 0)
);
--> statement-breakpoint
CREATE INDEX `observation_event_idx` ON `observation` (`event_id`,`observed_at`);