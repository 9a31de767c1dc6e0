CREATE TABLE `catalog` (
	`id` text PRIMARY KEY NOT NULL,
	`name` text NOT NULL,
	`source_note` text DEFAULT '' NOT NULL,
	`synthetic` integer DEFAULT false NOT NULL,
	`row_count` integer DEFAULT 0 NOT NULL,
	`columns` text NOT NULL,
	`weight_source` text DEFAULT 'none' NOT NULL,
	`report` text,
	`state` text DEFAULT 'importing' NOT NULL,
	`error` text,
	`created_by` text,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`ready_at` integer,
	FOREIGN KEY (`created_by`) REFERENCES `user`(`id`) ON UPDATE no action ON DELETE set null
);
--> statement-breakpoint
CREATE INDEX `catalog_state_idx` ON `catalog` (`state`,`created_at`);--> statement-breakpoint
CREATE TABLE `event_field` (
	`event_id` text NOT NULL,
	`skymap_id` text NOT NULL,
	`telescope_id` text NOT NULL,
	`field_id` text NOT NULL,
	`ra_deg` real NOT NULL,
	`dec_deg` real NOT NULL,
	`probability` real NOT NULL,
	`cumulative` real NOT NULL,
	`rank` integer NOT NULL,
	PRIMARY KEY(`event_id`, `telescope_id`, `rank`),
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`skymap_id`) REFERENCES `skymap`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`telescope_id`) REFERENCES `telescope`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE INDEX `event_field_event_idx` ON `event_field` (`event_id`);--> statement-breakpoint
CREATE TABLE `event_galaxy` (
	`event_id` text NOT NULL,
	`skymap_id` text NOT NULL,
	`rank` integer NOT NULL,
	`galaxy_id` integer NOT NULL,
	`score` real NOT NULL,
	`probability` real NOT NULL,
	`cumulative` real NOT NULL,
	PRIMARY KEY(`event_id`, `rank`),
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`skymap_id`) REFERENCES `skymap`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`galaxy_id`) REFERENCES `galaxy`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE INDEX `event_galaxy_event_idx` ON `event_galaxy` (`event_id`);--> statement-breakpoint
CREATE TABLE `event_targets_meta` (
	`event_id` text PRIMARY KEY NOT NULL,
	`skymap_id` text NOT NULL,
	`catalog_id` text,
	`mode` text,
	`level` real NOT NULL,
	`region_area_deg2` real,
	`candidates` integer DEFAULT 0 NOT NULL,
	`galaxies_stored` integer DEFAULT 0 NOT NULL,
	`without_distance` integer DEFAULT 0 NOT NULL,
	`completeness` text,
	`field_counts` text NOT NULL,
	`compute_ms` real,
	`computed_at` integer NOT NULL,
	FOREIGN KEY (`event_id`) REFERENCES `gw_event`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`skymap_id`) REFERENCES `skymap`(`id`) ON UPDATE no action ON DELETE cascade,
	FOREIGN KEY (`catalog_id`) REFERENCES `catalog`(`id`) ON UPDATE no action ON DELETE set null
);
--> statement-breakpoint
CREATE TABLE `galaxy` (
	`id` integer PRIMARY KEY NOT NULL,
	`catalog_id` text NOT NULL,
	`row` integer NOT NULL,
	`name` text NOT NULL,
	`ra_deg` real NOT NULL,
	`dec_deg` real NOT NULL,
	`distance_mpc` real NOT NULL,
	`distance_err_mpc` real NOT NULL,
	`weight` real NOT NULL,
	`b_abs_mag` real,
	`pixel` integer NOT NULL,
	FOREIGN KEY (`catalog_id`) REFERENCES `catalog`(`id`) ON UPDATE no action ON DELETE cascade
);
--> statement-breakpoint
CREATE INDEX `galaxy_catalog_pixel_idx` ON `galaxy` (`catalog_id`,`pixel`);--> statement-breakpoint
CREATE INDEX `galaxy_catalog_row_idx` ON `galaxy` (`catalog_id`,`row`);