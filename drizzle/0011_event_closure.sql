ALTER TABLE `gw_event` ADD `close_reason` text;--> statement-breakpoint
ALTER TABLE `gw_event` ADD `close_note` text;--> statement-breakpoint
ALTER TABLE `gw_event` ADD `closed_by` text REFERENCES user(id);