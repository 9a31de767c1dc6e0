CREATE TABLE `page_ack` (
	`page_id` text PRIMARY KEY NOT NULL,
	`user_id` text NOT NULL,
	`code` text NOT NULL,
	`expires_at` integer NOT NULL,
	`used_at` integer,
	FOREIGN KEY (`page_id`) REFERENCES `duty_page`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE UNIQUE INDEX `page_ack_user_code_idx` ON `page_ack` (`user_id`,`code`);--> statement-breakpoint
CREATE TABLE `page_message` (
	`id` text PRIMARY KEY NOT NULL,
	`event_id` text NOT NULL,
	`page_id` text,
	`user_id` text NOT NULL,
	`kind` text NOT NULL,
	`channel` text NOT NULL,
	`address` text NOT NULL,
	`subject` text NOT NULL,
	`body` text NOT NULL,
	`status` text DEFAULT 'queued' NOT NULL,
	`attempts` integer DEFAULT 0 NOT NULL,
	`next_attempt_at` integer,
	`last_error` text,
	`provider_ref` text,
	`created_at` integer NOT NULL,
	`sent_at` integer,
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`page_id`) REFERENCES `duty_page`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE INDEX `page_message_due_idx` ON `page_message` (`status`,`next_attempt_at`);--> statement-breakpoint
CREATE INDEX `page_message_page_idx` ON `page_message` (`page_id`);--> statement-breakpoint
CREATE TABLE `phone_contact` (
	`user_id` text PRIMARY KEY NOT NULL,
	`number` text,
	`verified_at` integer,
	`pending_number` text,
	`code_hash` text,
	`code_expires_at` integer,
	`code_tries` integer DEFAULT 0 NOT NULL,
	`channels` text NOT NULL,
	`updated_at` integer NOT NULL,
	FOREIGN KEY (`user_id`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE cascade
);
