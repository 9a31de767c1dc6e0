CREATE TABLE `candidate` (
	`id` text PRIMARY KEY NOT NULL,
	`event_id` text NOT NULL,
	`name` text NOT NULL,
	`ra_deg` real NOT NULL,
	`dec_deg` real NOT NULL,
	`discovered_at` integer NOT NULL,
	`magnitude` real NOT NULL,
	`magnitude_err` real,
	`filter` text NOT NULL,
	`telescope_id` text,
	`team_id` text NOT NULL,
	`reported_by_user_id` text,
	`reported_by_token_id` text,
	`notes` text DEFAULT '' NOT NULL,
	`classification` text,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`telescope_id`) REFERENCES `telescope`(`id`) ON UPDATE no action ON DELETE set null,
	FOREIGN KEY (`team_id`) REFERENCES `team`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`reported_by_user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null,
	FOREIGN KEY (`reported_by_token_id`) REFERENCES `api_token`(`id`) ON UPDATE no action ON DELETE set null,
	CONSTRAINT "candidate_ra" CHECK("candidate"."ra_deg" >= 0 AND "candidate"."ra_deg" < 360),
	CONSTRAINT "candidate_dec" CHECK("candidate"."dec_deg" BETWEEN -90 AND 90),
	CONSTRAINT "candidate_mag" CHECK("candidate"."magnitude" BETWEEN 5 AND 30),
	CONSTRAINT "candidate_mag_err" CHECK("candidate"."magnitude_err" IS NULL OR "candidate"."magnitude_err" >= 0)
);
--> statement-breakpoint
CREATE UNIQUE INDEX `candidate_event_name_uq` ON `candidate` (`event_id`,lower("name"));--> statement-breakpoint
CREATE INDEX `candidate_event_idx` ON `candidate` (`event_id`,`created_at`);--> statement-breakpoint
CREATE INDEX `candidate_created_idx` ON `candidate` (`created_at`);