CREATE TABLE `interpretations` (
	`id` integer PRIMARY KEY AUTOINCREMENT NOT NULL,
	`run_id` integer NOT NULL,
	`section` text NOT NULL,
	`text` text NOT NULL,
	`version` integer NOT NULL,
	`author_user_id` integer,
	`author_label` text NOT NULL,
	`at` integer DEFAULT (unixepoch('subsec') * 1000) NOT NULL,
	FOREIGN KEY (`run_id`) REFERENCES `runs`(`id`) ON UPDATE no action ON DELETE no action,
	FOREIGN KEY (`author_user_id`) REFERENCES `users`(`id`) ON UPDATE no action ON DELETE no action
);
--> statement-breakpoint
CREATE UNIQUE INDEX `interpretations_version` ON `interpretations` (`run_id`,`section`,`version`);