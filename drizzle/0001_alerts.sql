CREATE TABLE `duty_page` (
	`id` text PRIMARY KEY NOT NULL,
	`event_id` text NOT NULL,
	`notice_id` text NOT NULL,
	`user_id` text NOT NULL,
	`level` integer DEFAULT 0 NOT NULL,
	`sent_at` integer NOT NULL,
	`escalated_at` integer,
	`acknowledged_at` integer,
	`acknowledged_by` text,
	`latency_s` real,
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`notice_id`) REFERENCES `notice`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`acknowledged_by`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null
);
--> statement-breakpoint
CREATE INDEX `duty_page_event_idx` ON `duty_page` (`event_id`);--> statement-breakpoint
CREATE INDEX `duty_page_open_idx` ON `duty_page` (`acknowledged_at`);--> statement-breakpoint
CREATE TABLE `duty_shift` (
	`id` text PRIMARY KEY NOT NULL,
	`user_id` text NOT NULL,
	`starts_at` integer NOT NULL,
	`ends_at` integer NOT NULL,
	`rank` integer DEFAULT 0 NOT NULL,
	`handover_note` text DEFAULT '' NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE cascade,
	CONSTRAINT "duty_shift_order" CHECK("duty_shift"."ends_at" > "duty_shift"."starts_at")
);
--> statement-breakpoint
CREATE INDEX `duty_shift_time_idx` ON `duty_shift` (`starts_at`,`ends_at`);--> statement-breakpoint
CREATE TABLE `gw_event` (
	`id` text PRIMARY KEY NOT NULL,
	`source_event_id` text NOT NULL,
	`state` text DEFAULT 'active' NOT NULL,
	`role` text NOT NULL,
	`event_time` integer,
	`latest_notice_id` text,
	`latest_kind` text,
	`far_hz` real,
	`classification` text,
	`properties` text,
	`latest_skymap_id` text,
	`triage` text,
	`retracted_at` integer,
	`closed_at` integer,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`updated_at` integer
);
--> statement-breakpoint
CREATE UNIQUE INDEX `gw_event_source_event_id_unique` ON `gw_event` (`source_event_id`);--> statement-breakpoint
CREATE INDEX `gw_event_state_idx` ON `gw_event` (`state`,`created_at`);--> statement-breakpoint
CREATE TABLE `notice` (
	`id` text PRIMARY KEY NOT NULL,
	`event_id` text NOT NULL,
	`inbox_id` integer,
	`ivorn` text NOT NULL,
	`kind` text NOT NULL,
	`role` text NOT NULL,
	`authored_at` integer NOT NULL,
	`far_hz` real,
	`classification` text,
	`properties` text,
	`skymap_url` text,
	`citations` text NOT NULL,
	`supersedes_ivorn` text,
	`parsed` text NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`inbox_id`) REFERENCES `notice_inbox`(`id`) ON UPDATE no action ON DELETE set null
);
--> statement-breakpoint
CREATE UNIQUE INDEX `notice_ivorn_unique` ON `notice` (`ivorn`);--> statement-breakpoint
CREATE INDEX `notice_event_idx` ON `notice` (`event_id`,`authored_at`);--> statement-breakpoint
CREATE TABLE `notice_inbox` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`ivorn` text NOT NULL,
	`raw_xml` text NOT NULL,
	`via` text NOT NULL,
	`received_at` integer NOT NULL,
	`processed_at` integer,
	`attempts` integer DEFAULT 0 NOT NULL,
	`error` text,
	`uploaded_skymap_path` text
);
--> statement-breakpoint
CREATE UNIQUE INDEX `notice_inbox_ivorn_unique` ON `notice_inbox` (`ivorn`);--> statement-breakpoint
CREATE INDEX `notice_inbox_pending_idx` ON `notice_inbox` (`processed_at`);--> statement-breakpoint
CREATE TABLE `skymap` (
	`id` text PRIMARY KEY NOT NULL,
	`event_id` text NOT NULL,
	`notice_id` text NOT NULL,
	`source_url` text,
	`file_path` text,
	`bytes` integer,
	`sha256` text,
	`summary` text,
	`display` text,
	`error` text,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`notice_id`) REFERENCES `notice`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE INDEX `skymap_event_idx` ON `skymap` (`event_id`);--> statement-breakpoint
CREATE TABLE `triage_policy` (
	`id` integer PRIMARY KEY NOT NULL,
	`max_far_per_year` real DEFAULT 12 NOT NULL,
	`min_prob_ns` real DEFAULT 0.1 NOT NULL,
	`max_area90_deg2` real DEFAULT 2000 NOT NULL,
	`max_distance_mpc` real DEFAULT 400 NOT NULL,
	`require_observation_role` integer DEFAULT true NOT NULL,
	`escalate_after_min` real DEFAULT 10 NOT NULL,
	`updated_by` text,
	`updated_at` integer,
	FOREIGN KEY (`updated_by`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null
);
