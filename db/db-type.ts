/**
 * The type of a database connection, on its own so that query modules the connection itself
 * calls at opening (the audit chain's seal) need not import db/client.ts.
 */
import type Database from "better-sqlite3";
import type { BetterSQLite3Database } from "drizzle-orm/better-sqlite3";
import type * as schema from "./schema";

export type Db = BetterSQLite3Database<typeof schema> & { $client: Database.Database };
