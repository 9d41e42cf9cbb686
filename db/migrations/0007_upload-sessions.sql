CREATE TABLE `upload_files` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`session_id` integer NOT NULL,
	`transfer_id` text NOT NULL,
	`name` text NOT NULL,
	`size_bytes` integer NOT NULL,
	`received_bytes` integer DEFAULT 0 NOT NULL,
	`sha256` text,
	`format` text,
	`verdict` text DEFAULT 'receiving' NOT NULL,
	`message` text DEFAULT '' NOT NULL,
	`byte_offset` integer,
	`stored_path` text,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`checked_at` integer,
	FOREIGN KEY (`session_id`) REFERENCES `upload_sessions`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE UNIQUE INDEX `upload_files_transfer_id_unique` ON `upload_files` (`transfer_id`);--> statement-breakpoint
CREATE INDEX `upload_files_session` ON `upload_files` (`session_id`,`id`);--> statement-breakpoint
CREATE INDEX `upload_files_sha` ON `upload_files` (`sha256`);--> statement-breakpoint
CREATE TABLE `upload_sessions` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`survey_id` integer NOT NULL,
	`profile_id` integer NOT NULL,
	`created_by_user_id` integer,
	`created_by_label` text NOT NULL,
	`state` text DEFAULT 'open' NOT NULL,
	`dataset_id` integer,
	`run_id` integer,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`completed_at` integer,
	FOREIGN KEY (`survey_id`) REFERENCES `surveys`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`profile_id`) REFERENCES `profiles`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`created_by_user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`dataset_id`) REFERENCES `datasets`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE INDEX `upload_sessions_profile` ON `upload_sessions` (`profile_id`,`id`);