CREATE TABLE `notice_opt_outs` (
	`user_id` integer NOT NULL,
	`kind` text NOT NULL,
	PRIMARY KEY(`user_id`, `kind`),
	FOREIGN KEY (`user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE TABLE `notices` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`kind` text NOT NULL,
	`to_user_id` integer,
	`to_address` text NOT NULL,
	`subject` text NOT NULL,
	`body` text NOT NULL,
	`entity_type` text DEFAULT '' NOT NULL,
	`entity_id` text DEFAULT '' NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`claimed_at` integer,
	`sent_at` integer,
	`attempts` integer DEFAULT 0 NOT NULL,
	`error` text,
	FOREIGN KEY (`to_user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE INDEX `notices_unsent` ON `notices` (`sent_at`,`id`);--> statement-breakpoint
CREATE TABLE `password_tokens` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`user_id` integer NOT NULL,
	`purpose` text NOT NULL,
	`token_hash` text NOT NULL,
	`created_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	`expires_at` integer NOT NULL,
	`used_at` integer,
	FOREIGN KEY (`user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE UNIQUE INDEX `password_tokens_token_hash_unique` ON `password_tokens` (`token_hash`);--> statement-breakpoint
CREATE INDEX `password_tokens_user` ON `password_tokens` (`user_id`);--> statement-breakpoint
CREATE TABLE `survey_people` (
	`survey_id` integer NOT NULL,
	`user_id` integer NOT NULL,
	`role` text DEFAULT 'processor' NOT NULL,
	`added_at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	PRIMARY KEY(`survey_id`, `user_id`),
	FOREIGN KEY (`survey_id`) REFERENCES `surveys`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
ALTER TABLE `profiles` ADD `orientation_deg` real;--> statement-breakpoint
ALTER TABLE `profiles` ADD `spread_description` text DEFAULT '' NOT NULL;--> statement-breakpoint
ALTER TABLE `profiles` ADD `crs` text DEFAULT '' NOT NULL;--> statement-breakpoint
ALTER TABLE `profiles` ADD `start_x` real;--> statement-breakpoint
ALTER TABLE `profiles` ADD `start_y` real;--> statement-breakpoint
ALTER TABLE `profiles` ADD `end_x` real;--> statement-breakpoint
ALTER TABLE `profiles` ADD `end_y` real;--> statement-breakpoint
ALTER TABLE `surveys` ADD `purpose` text DEFAULT '' NOT NULL;--> statement-breakpoint
ALTER TABLE `surveys` ADD `start_date` text DEFAULT '' NOT NULL;--> statement-breakpoint
ALTER TABLE `surveys` ADD `end_date` text DEFAULT '' NOT NULL;--> statement-breakpoint
ALTER TABLE `surveys` ADD `notes` text DEFAULT '' NOT NULL;