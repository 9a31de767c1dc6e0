CREATE TABLE `calendar_feed` (
	`id` text PRIMARY KEY NOT NULL,
	`user_id` text NOT NULL,
	`scope` text NOT NULL,
	`token_hash` text NOT NULL,
	`prefix` text NOT NULL,
	`last_fetched_at` integer,
	`revoked_at` integer,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE UNIQUE INDEX `calendar_feed_token_hash_unique` ON `calendar_feed` (`token_hash`);--> statement-breakpoint
CREATE UNIQUE INDEX `calendar_feed_live` ON `calendar_feed` (`user_id`,`scope`) WHERE "calendar_feed"."revoked_at" IS NULL;--> statement-breakpoint
CREATE TABLE `chat_webhook` (
	`id` text PRIMARY KEY NOT NULL,
	`name` text NOT NULL,
	`url` text NOT NULL,
	`kinds` text NOT NULL,
	`created_by` text,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`updated_at` integer,
	FOREIGN KEY (`created_by`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null
);
--> statement-breakpoint
CREATE TABLE `webhook_delivery` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`webhook_id` text NOT NULL,
	`kind` text NOT NULL,
	`message_key` text NOT NULL,
	`notice_id` text,
	`body` text NOT NULL,
	`state` text DEFAULT 'pending' NOT NULL,
	`attempts` integer DEFAULT 0 NOT NULL,
	`next_attempt_at` integer,
	`last_status` integer,
	`last_error` text,
	`last_attempt_at` integer,
	`delivered_at` integer,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`webhook_id`) REFERENCES `chat_webhook`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE UNIQUE INDEX `webhook_delivery_once` ON `webhook_delivery` (`webhook_id`,`message_key`);--> statement-breakpoint
CREATE INDEX `webhook_delivery_due_idx` ON `webhook_delivery` (`state`,`next_attempt_at`);--> statement-breakpoint
CREATE INDEX `webhook_delivery_hook_idx` ON `webhook_delivery` (`webhook_id`,`created_at`);