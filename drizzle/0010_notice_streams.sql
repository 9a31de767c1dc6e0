CREATE TABLE `notice_stream` (
	`stream` text PRIMARY KEY NOT NULL,
	`vocabulary` text NOT NULL,
	`updated_by` text,
	`updated_at` integer NOT NULL,
	FOREIGN KEY (`updated_by`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null
);
