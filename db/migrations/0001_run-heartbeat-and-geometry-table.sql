ALTER TABLE `runs` ADD `heartbeat_at` integer;--> statement-breakpoint
ALTER TABLE `runs` ADD `geometry_table_hash` text;