#!/usr/bin/env node
// Entry point installed as `tracewright`: runs the TypeScript CLI through tsx's loader.
import { register } from "tsx/esm/api";
import { fileURLToPath } from "node:url";
import path from "node:path";

process.env.TSX_LOADED = "1";
register();
const here = path.dirname(fileURLToPath(import.meta.url));
await import(path.join(here, "..", "cli", "index.ts"));
