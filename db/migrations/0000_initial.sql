CREATE TABLE `artifacts` (
	`hash` text PRIMARY KEY NOT NULL,
	`kind` text NOT NULL,
	`path` text NOT NULL,
	`size_bytes` integer NOT NULL,
	`produced_by_run_step_id` integer,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL
);
--> statement-breakpoint
CREATE TABLE `audit_events` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`actor_user_id` integer,
	`actor_label` text NOT NULL,
	`door` text NOT NULL,
	`action` text NOT NULL,
	`entity_type` text NOT NULL,
	`entity_id` text NOT NULL,
	`before_json` text,
	`after_json` text,
	FOREIGN KEY (`actor_user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE INDEX `audit_events_entity` ON `audit_events` (`entity_type`,`entity_id`);--> statement-breakpoint
CREATE INDEX `audit_events_at` ON `audit_events` (`at`);--> statement-breakpoint
CREATE TABLE `dataset_files` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`dataset_id` integer NOT NULL,
	`name` text NOT NULL,
	`size_bytes` integer NOT NULL,
	`sha256` text NOT NULL,
	FOREIGN KEY (`dataset_id`) REFERENCES `datasets`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE INDEX `dataset_files_dataset` ON `dataset_files` (`dataset_id`);--> statement-breakpoint
CREATE TABLE `datasets` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`survey_id` integer,
	`profile_id` integer,
	`name` text NOT NULL,
	`folder_path` text NOT NULL,
	`content_hash` text NOT NULL,
	`file_count` integer NOT NULL,
	`total_bytes` integer NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`survey_id`) REFERENCES `surveys`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`profile_id`) REFERENCES `profiles`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE UNIQUE INDEX `datasets_folder_hash` ON `datasets` (`folder_path`,`content_hash`);--> statement-breakpoint
CREATE TABLE `pipeline_versions` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`pipeline_id` integer NOT NULL,
	`version` integer NOT NULL,
	`source_text` text NOT NULL,
	`source_path` text,
	`definition_json` text NOT NULL,
	`content_hash` text NOT NULL,
	`created_by_user_id` integer,
	`created_by_label` text NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`pipeline_id`) REFERENCES `pipelines`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`created_by_user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE UNIQUE INDEX `pipeline_versions_number` ON `pipeline_versions` (`pipeline_id`,`version`);--> statement-breakpoint
CREATE INDEX `pipeline_versions_hash` ON `pipeline_versions` (`pipeline_id`,`content_hash`);--> statement-breakpoint
CREATE TABLE `pipelines` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`name` text NOT NULL,
	`survey_id` integer,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`survey_id`) REFERENCES `surveys`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE UNIQUE INDEX `pipelines_name_unique` ON `pipelines` (`name`);--> statement-breakpoint
CREATE TABLE `profiles` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`survey_id` integer NOT NULL,
	`name` text NOT NULL,
	`description` text DEFAULT '' NOT NULL,
	FOREIGN KEY (`survey_id`) REFERENCES `surveys`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE UNIQUE INDEX `profiles_survey_name` ON `profiles` (`survey_id`,`name`);--> statement-breakpoint
CREATE TABLE `rejected_files` (
	`run_id` integer NOT NULL,
	`name` text NOT NULL,
	`reason` text NOT NULL,
	PRIMARY KEY(`run_id`, `name`),
	FOREIGN KEY (`run_id`) REFERENCES `runs`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE TABLE `reviews` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`run_id` integer NOT NULL,
	`reviewer_user_id` integer NOT NULL,
	`decision` text NOT NULL,
	`comment` text DEFAULT '' NOT NULL,
	`at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`run_id`) REFERENCES `runs`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`reviewer_user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE INDEX `reviews_run` ON `reviews` (`run_id`);--> statement-breakpoint
CREATE TABLE `run_steps` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`run_id` integer NOT NULL,
	`position` integer NOT NULL,
	`label` text NOT NULL,
	`step_id` text NOT NULL,
	`step_version` integer NOT NULL,
	`params_json` text NOT NULL,
	`cache_key` text,
	`inputs_json` text DEFAULT '{}' NOT NULL,
	`outputs_json` text DEFAULT '{}' NOT NULL,
	`cache_hit` integer DEFAULT false NOT NULL,
	`cache_source_step_id` integer,
	`status` text DEFAULT 'waiting' NOT NULL,
	`progress` real DEFAULT 0 NOT NULL,
	`progress_message` text,
	`summary_json` text,
	`series_json` text,
	`error` text,
	`started_at` integer,
	`finished_at` integer,
	`duration_ms` integer,
	FOREIGN KEY (`run_id`) REFERENCES `runs`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE UNIQUE INDEX `run_steps_position` ON `run_steps` (`run_id`,`position`);--> statement-breakpoint
CREATE INDEX `run_steps_cache_key` ON `run_steps` (`cache_key`);--> statement-breakpoint
CREATE TABLE `runs` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`pipeline_version_id` integer NOT NULL,
	`dataset_id` integer NOT NULL,
	`parent_run_id` integer,
	`rerun_from_step` text,
	`overrides_json` text DEFAULT '{}' NOT NULL,
	`started_by_user_id` integer,
	`started_by_label` text NOT NULL,
	`door` text NOT NULL,
	`status` text DEFAULT 'queued' NOT NULL,
	`cancel_requested` integer DEFAULT false NOT NULL,
	`host_pid` integer,
	`error` text,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`started_at` integer,
	`finished_at` integer,
	FOREIGN KEY (`pipeline_version_id`) REFERENCES `pipeline_versions`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`dataset_id`) REFERENCES `datasets`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`started_by_user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE INDEX `runs_status` ON `runs` (`status`);--> statement-breakpoint
CREATE INDEX `runs_created` ON `runs` (`created_at`);--> statement-breakpoint
CREATE TABLE `step_logs` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`run_id` integer NOT NULL,
	`run_step_id` integer,
	`at` integer NOT NULL,
	`level` text NOT NULL,
	`message` text NOT NULL,
	`data_json` text,
	FOREIGN KEY (`run_id`) REFERENCES `runs`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`run_step_id`) REFERENCES `run_steps`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE INDEX `step_logs_run` ON `step_logs` (`run_id`,`id`);--> statement-breakpoint
CREATE INDEX `step_logs_step` ON `step_logs` (`run_step_id`,`id`);--> statement-breakpoint
CREATE TABLE `surveys` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`slug` text NOT NULL,
	`name` text NOT NULL,
	`site` text DEFAULT '' NOT NULL,
	`client` text DEFAULT '' NOT NULL,
	`description` text DEFAULT '' NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL
);
--> statement-breakpoint
CREATE UNIQUE INDEX `surveys_slug_unique` ON `surveys` (`slug`);--> statement-breakpoint
CREATE TABLE `users` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`email` text NOT NULL,
	`name` text NOT NULL,
	`role` text NOT NULL,
	`password_hash` text NOT NULL,
	`active` integer DEFAULT true NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL
);
--> statement-breakpoint
CREATE UNIQUE INDEX `users_email_unique` ON `users` (`email`);--> statement-breakpoint
CREATE TABLE `watch_events` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`folder_id` integer NOT NULL,
	`at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`file` text,
	`event` text NOT NULL,
	`reason` text DEFAULT '' NOT NULL,
	`run_id` integer,
	FOREIGN KEY (`folder_id`) REFERENCES `watched_folders`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE INDEX `watch_events_folder` ON `watch_events` (`folder_id`,`id`);--> statement-breakpoint
CREATE TABLE `watched_folders` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`folder_path` text NOT NULL,
	`pipeline_path` text NOT NULL,
	`last_content_hash` text,
	`last_run_id` integer,
	`updated_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL
);
--> statement-breakpoint
CREATE UNIQUE INDEX `watched_folders_folder_path_unique` ON `watched_folders` (`folder_path`);