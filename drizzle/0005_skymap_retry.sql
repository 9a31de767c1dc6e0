ALTER TABLE `skymap` ADD `fetch_attempts` integer DEFAULT 0 NOT NULL;--> statement-breakpoint
ALTER TABLE `skymap` ADD `retry_at` integer;--> statement-breakpoint
CREATE INDEX `skymap_retry_idx` ON `skymap` (`retry_at`);