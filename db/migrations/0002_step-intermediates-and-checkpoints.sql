CREATE TABLE `step_checkpoints` (
	`cache_key` text PRIMARY KEY NOT NULL,
	`artifact_hash` text NOT NULL,
	`at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL
);
--> statement-breakpoint
CREATE TABLE `step_intermediates` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`run_step_id` integer NOT NULL,
	`kind` text NOT NULL,
	`index` integer NOT NULL,
	`label` text,
	`artifact_hash` text NOT NULL,
	`meta_json` text,
	`at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`run_step_id`) REFERENCES `run_steps`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE UNIQUE INDEX `step_intermediates_kind_index` ON `step_intermediates` (`run_step_id`,`kind`,`index`);