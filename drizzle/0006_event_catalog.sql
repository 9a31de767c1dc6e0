ALTER TABLE `gw_event` ADD `catalog_id` text REFERENCES catalog(id) ON DELETE set null;--> statement-breakpoint
-- Events already stored keep the catalogue their ranking used; those never ranked take the catalogue in use now.
UPDATE `gw_event` SET `catalog_id` = coalesce(
	(SELECT `catalog_id` FROM `event_targets_meta` WHERE `event_targets_meta`.`event_id` = `gw_event`.`id`),
	(SELECT `id` FROM `catalog` WHERE `state` = 'ready' ORDER BY `ready_at` DESC, `created_at` DESC LIMIT 1)
);
