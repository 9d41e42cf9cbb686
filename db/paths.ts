/**
 * Where Tracewright keeps its data: the data folder (database, artifacts, demo secrets) and the
 * migrations. Defaults suit a checkout: ./data under the project root. Override with
 * TRACEWRIGHT_DATA_DIR and TRACEWRIGHT_DB.
 */
import fs from "node:fs";
import path from "node:path";
import { fileURLToPath } from "node:url";

function findProjectRoot(): string {
  // From this module's location when it is a real file in the tree (CLI, tsx, vitest) ...
  try {
    const here = path.dirname(fileURLToPath(import.meta.url));
    const candidate = path.resolve(here, "..");
    if (fs.existsSync(path.join(candidate, "db", "migrations"))) return candidate;
  } catch {
    // bundled: import.meta.url may not be a file URL
  }
  // ... else the working directory (next start runs in the project root).
  return process.cwd();
}

/** The project root (where package.json and db/migrations live). */
export const projectRoot = findProjectRoot();

/** The data folder; created on demand. */
export function dataDir(): string {
  // The data folder is chosen at run time; keep the bundler from tracing it into the build.
  return path.resolve(/* turbopackIgnore: true */ process.env.TRACEWRIGHT_DATA_DIR ?? path.join(projectRoot, "data"));
}

/** The SQLite database file. */
export function databasePath(): string {
  return path.resolve(/* turbopackIgnore: true */ process.env.TRACEWRIGHT_DB ?? path.join(dataDir(), "tracewright.db"));
}

/** The generated migrations folder. */
export function migrationsDir(): string {
  return path.join(projectRoot, "db", "migrations");
}
