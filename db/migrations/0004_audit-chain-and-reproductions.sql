CREATE TABLE `run_reproductions` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`run_id` integer NOT NULL,
	`requested_by_user_id` integer,
	`requested_by_label` text NOT NULL,
	`door` text NOT NULL,
	`verdict` text DEFAULT 'running' NOT NULL,
	`progress` real DEFAULT 0 NOT NULL,
	`progress_message` text,
	`details_json` text,
	`error` text,
	`host_pid` integer,
	`started_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`finished_at` integer,
	FOREIGN KEY (`run_id`) REFERENCES `runs`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`requested_by_user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE INDEX `run_reproductions_run` ON `run_reproductions` (`run_id`,`id`);--> statement-breakpoint
ALTER TABLE `audit_events` ADD `prev_hash` text;--> statement-breakpoint
ALTER TABLE `audit_events` ADD `hash` text;