/**
 * Worker entry point: re-exports every task function; piscina calls them by name.
 * Add new tasks to ./tasks.ts, not here.
 */
export * from "./tasks";
