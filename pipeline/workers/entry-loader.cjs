/**
 * Worker entry used by the pool when running from TypeScript sources.
 *
 * On Node 20 a worker thread started with `--import tsx` in its execArgv still loads its own
 * entry file with the default loader and fails on ".ts" (ERR_UNKNOWN_FILE_EXTENSION). This
 * CommonJS file needs no loader: it registers tsx's ESM hooks through tsx's API inside the
 * worker, then imports entry.ts. piscina looks a task up as `module[name]` and awaits it, so
 * each property resolves to the task function once the import has finished.
 */
/* eslint-disable @typescript-eslint/no-require-imports -- CommonJS on purpose: it must load without a loader */
const path = require("node:path");
const { pathToFileURL } = require("node:url");

const tasks = import("tsx/esm/api").then((api) => {
  api.register();
  return import(pathToFileURL(path.join(__dirname, "entry.ts")).href);
});

module.exports = new Proxy(
  {},
  {
    get(_target, name) {
      if (name === "__esModule") return true;
      if (typeof name !== "string" || name === "then") return undefined;
      return tasks.then((m) => m[name]);
    },
  },
);
