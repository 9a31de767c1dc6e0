CREATE TABLE `candidate_classification` (
	`id` text PRIMARY KEY NOT NULL,
	`candidate_id` text NOT NULL,
	`label` text NOT NULL,
	`confidence` text NOT NULL,
	`redshift` real,
	`notes` text DEFAULT '' NOT NULL,
	`spectrum_id` text,
	`author_user_id` text,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`candidate_id`) REFERENCES `candidate`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`spectrum_id`) REFERENCES `candidate_spectrum`(`id`) ON UPDATE no action ON DELETE set null,
	FOREIGN KEY (`author_user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null,
	CONSTRAINT "candidate_classification_z" CHECK("candidate_classification"."redshift" IS NULL OR "candidate_classification"."redshift" BETWEEN -0.01 AND 10)
);
--> statement-breakpoint
CREATE INDEX `candidate_classification_idx` ON `candidate_classification` (`candidate_id`,`created_at`);--> statement-breakpoint
CREATE TABLE `candidate_comment` (
	`id` text PRIMARY KEY NOT NULL,
	`candidate_id` text NOT NULL,
	`user_id` text,
	`body` text NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`candidate_id`) REFERENCES `candidate`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null
);
--> statement-breakpoint
CREATE INDEX `candidate_comment_idx` ON `candidate_comment` (`candidate_id`,`created_at`);--> statement-breakpoint
CREATE TABLE `candidate_decision` (
	`id` text PRIMARY KEY NOT NULL,
	`candidate_id` text NOT NULL,
	`state` text NOT NULL,
	`reason` text,
	`note` text DEFAULT '' NOT NULL,
	`user_id` text,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`candidate_id`) REFERENCES `candidate`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null,
	CONSTRAINT "candidate_decision_reason" CHECK(("candidate_decision"."state" = 'rejected') = ("candidate_decision"."reason" IS NOT NULL))
);
--> statement-breakpoint
CREATE INDEX `candidate_decision_idx` ON `candidate_decision` (`candidate_id`,`created_at`);--> statement-breakpoint
CREATE TABLE `candidate_photometry` (
	`id` text PRIMARY KEY NOT NULL,
	`candidate_id` text NOT NULL,
	`observed_at` integer NOT NULL,
	`filter` text NOT NULL,
	`mag` real,
	`mag_err` real,
	`limit_mag` real,
	`observation_id` text,
	`reported_by_user_id` text,
	`reported_by_token_id` text,
	`source` text NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`candidate_id`) REFERENCES `candidate`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`observation_id`) REFERENCES `observation`(`id`) ON UPDATE no action ON DELETE set null,
	FOREIGN KEY (`reported_by_user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null,
	FOREIGN KEY (`reported_by_token_id`) REFERENCES `api_token`(`id`) ON UPDATE no action ON DELETE set null,
	CONSTRAINT "candidate_photometry_kind" CHECK("candidate_photometry"."mag" IS NOT NULL OR "candidate_photometry"."limit_mag" IS NOT NULL),
	CONSTRAINT "candidate_photometry_err" CHECK("candidate_photometry"."mag" IS NULL OR "candidate_photometry"."mag_err" > 0)
);
--> statement-breakpoint
CREATE UNIQUE INDEX `candidate_photometry_uq` ON `candidate_photometry` (`candidate_id`,`filter`,`observed_at`);--> statement-breakpoint
CREATE TABLE `candidate_spectrum` (
	`id` text PRIMARY KEY NOT NULL,
	`candidate_id` text NOT NULL,
	`file_path` text NOT NULL,
	`original_name` text NOT NULL,
	`bytes` integer NOT NULL,
	`sha256` text NOT NULL,
	`format` text NOT NULL,
	`summary` text NOT NULL,
	`notes` text DEFAULT '' NOT NULL,
	`uploaded_by_user_id` text,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`candidate_id`) REFERENCES `candidate`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`uploaded_by_user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null
);
--> statement-breakpoint
CREATE INDEX `candidate_spectrum_idx` ON `candidate_spectrum` (`candidate_id`,`created_at`);--> statement-breakpoint
CREATE TABLE `candidate_vetting` (
	`candidate_id` text PRIMARY KEY NOT NULL,
	`inputs_key` text NOT NULL,
	`vetting` text NOT NULL,
	`verdict` text NOT NULL,
	`computed_at` integer NOT NULL,
	`kilonova_like_at` integer,
	FOREIGN KEY (`candidate_id`) REFERENCES `candidate`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE TABLE `kilonova_rules` (
	`id` integer PRIMARY KEY NOT NULL,
	`changes` text NOT NULL,
	`updated_by` text,
	`updated_at` integer NOT NULL,
	FOREIGN KEY (`updated_by`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null
);
--> statement-breakpoint
CREATE TABLE `spectrum_take` (
	`id` text PRIMARY KEY NOT NULL,
	`candidate_id` text NOT NULL,
	`user_id` text NOT NULL,
	`state` text DEFAULT 'taken' NOT NULL,
	`note` text DEFAULT '' NOT NULL,
	`taken_at` integer NOT NULL,
	`ended_at` integer,
	FOREIGN KEY (`candidate_id`) REFERENCES `candidate`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE UNIQUE INDEX `spectrum_take_open_uq` ON `spectrum_take` (`candidate_id`) WHERE state = 'taken';--> statement-breakpoint
CREATE INDEX `spectrum_take_candidate_idx` ON `spectrum_take` (`candidate_id`,`taken_at`);--> statement-breakpoint
ALTER TABLE `candidate` ADD `state` text DEFAULT 'open' NOT NULL;