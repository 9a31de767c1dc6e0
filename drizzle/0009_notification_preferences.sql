CREATE TABLE `notification_outbox` (
	`id` text PRIMARY KEY NOT NULL,
	`user_id` text NOT NULL,
	`kind` text NOT NULL,
	`mode` text NOT NULL,
	`subject` text NOT NULL,
	`text` text NOT NULL,
	`release_at` integer,
	`created_at` integer NOT NULL,
	`sent_at` integer,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE INDEX `notification_outbox_waiting_idx` ON `notification_outbox` (`sent_at`,`user_id`,`created_at`);--> statement-breakpoint
CREATE TABLE `notification_preference` (
	`user_id` text PRIMARY KEY NOT NULL,
	`kinds` text NOT NULL,
	`event_classes` text,
	`quiet_start` text,
	`quiet_end` text,
	`time_zone` text DEFAULT 'UTC' NOT NULL,
	`quiet_action` text DEFAULT 'hold' NOT NULL,
	`digest_period_min` integer DEFAULT 60 NOT NULL,
	`updated_at` integer NOT NULL,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE TABLE `rank_snapshot` (
	`event_id` text NOT NULL,
	`target_kind` text NOT NULL,
	`telescope_id` text NOT NULL,
	`target_id` text NOT NULL,
	`from_skymap_id` text NOT NULL,
	`from_catalog_id` text,
	`rank` integer NOT NULL,
	`probability` real NOT NULL,
	PRIMARY KEY(`event_id`, `target_kind`, `telescope_id`, `target_id`),
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE TABLE `server_secret` (
	`name` text PRIMARY KEY NOT NULL,
	`value` text NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL
);
