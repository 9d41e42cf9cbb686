#!/usr/bin/env node
/**
 * Fails when a browser bundle carries server code: scans every JavaScript file the build serves
 * to browsers (.next/static) for text that only server modules hold (database schema names, the
 * SQLite driver, password hashing, the session secret file). Run after `next build`
 * (`npm run build` does), and by `npm test` after the browser tests have built the app.
 */
import fs from "node:fs";
import path from "node:path";

const root = path.resolve(path.dirname(new URL(import.meta.url).pathname), "..");
const dir = path.join(root, ".next", "static");

/** Text found only in server modules, and where it comes from. */
export const SERVER_MARKERS = [
  ["password_hash", "db/schema.ts (users table)"],
  ["audit_events", "db/schema.ts (audit table)"],
  ["step_logs", "db/schema.ts (log table)"],
  ["sqliteTable", "drizzle-orm/sqlite-core"],
  ["better-sqlite3", "the SQLite driver"],
  ["bcryptjs", "password hashing"],
  ["rate-limiter-flexible", "sign-in throttling"],
  ["nodemailer", "mail"],
];

/** Files of `dir` (recursive) ending in .js. */
function jsFiles(d) {
  if (!fs.existsSync(d)) return [];
  return fs.readdirSync(d, { withFileTypes: true }).flatMap((e) => {
    const full = path.join(d, e.name);
    return e.isDirectory() ? jsFiles(full) : e.name.endsWith(".js") ? [full] : [];
  });
}

/** Every (file, marker) pair found under `staticDir`. */
export function findServerCode(staticDir) {
  const found = [];
  for (const file of jsFiles(staticDir)) {
    const text = fs.readFileSync(file, "utf8");
    for (const [marker, source] of SERVER_MARKERS) if (text.includes(marker)) found.push({ file: path.relative(root, file), marker, source });
  }
  return found;
}

if (process.argv[1] && path.resolve(process.argv[1]) === path.resolve(new URL(import.meta.url).pathname)) {
  const files = jsFiles(dir);
  if (files.length === 0) {
    process.stderr.write("check-client-bundles: no .next/static JavaScript; run next build first\n");
    process.exit(2);
  }
  const found = findServerCode(dir);
  if (found.length > 0) {
    for (const f of found) process.stderr.write(`${f.file}: contains "${f.marker}" (${f.source}): server code in a browser bundle\n`);
    process.exit(1);
  }
  process.stdout.write(`check-client-bundles: ${files.length} browser chunks, no server code\n`);
}
