/**
 * Server modules stay out of browser code: no module reachable from a "use client" file (by
 * imports that are not type-only, stopping at "use server" modules) is a database module or carries the `server-only` marker; and
 * the bundle check (scripts/check-client-bundles.mjs) finds server text in a chunk and, when a
 * build exists, none in the real chunks.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { describe, expect, it } from "vitest";

const root = path.resolve(__dirname, "../..");

function resolveImport(from: string, spec: string): string | null {
  let base: string;
  if (spec.startsWith("@/")) base = path.join(root, spec.slice(2));
  else if (spec.startsWith(".")) base = path.resolve(path.dirname(from), spec);
  else return null;
  for (const c of [base, `${base}.ts`, `${base}.tsx`, path.join(base, "index.ts")]) if (fs.existsSync(c) && fs.statSync(c).isFile()) return c;
  return null;
}

/** Value imports of a module (type-only imports are erased by the compiler and never bundled). */
function valueImports(file: string): string[] {
  const src = fs.readFileSync(file, "utf8");
  const out: string[] = [];
  for (const m of src.matchAll(/^\s*(import|export)\s+(?!type\s)([^;]*?)\s+from\s+["']([^"']+)["']/gm)) out.push(m[3]);
  for (const m of src.matchAll(/^\s*import\s+["']([^"']+)["']/gm)) out.push(m[1]);
  return out;
}

function clientFiles(dir: string): string[] {
  return fs.readdirSync(dir, { withFileTypes: true }).flatMap((e) => {
    const full = path.join(dir, e.name);
    if (e.isDirectory()) return clientFiles(full);
    return /\.tsx?$/.test(e.name) && /^["']use client["']/m.test(fs.readFileSync(full, "utf8")) ? [full] : [];
  });
}

describe("client code imports no server module", () => {
  it("no database module and no server-only module is reachable from a client component", () => {
    const bad: string[] = [];
    for (const start of clientFiles(path.join(root, "app"))) {
      const seen = new Set<string>();
      const stack: Array<[string, string[]]> = [[start, [path.relative(root, start)]]];
      while (stack.length) {
        const [file, chain] = stack.pop()!;
        if (seen.has(file)) continue;
        seen.add(file);
        const rel = path.relative(root, file);
        // A "use server" module reaches the browser as references to its actions, not as code.
        if (file !== start && /^["']use server["']/m.test(fs.readFileSync(file, "utf8"))) continue;
        const imports = valueImports(file);
        if (/^db\/(schema|client)\.ts$|^db\/queries\//.test(rel) || imports.includes("server-only")) bad.push(chain.join(" -> "));
        for (const spec of imports) {
          const next = resolveImport(file, spec);
          if (next) stack.push([next, [...chain, path.relative(root, next)]]);
        }
      }
    }
    expect(bad).toEqual([]);
  });
});

describe("the bundle check", () => {
  it("finds the users table's password column in a chunk", async () => {
    const { findServerCode } = (await import(path.join(root, "scripts/check-client-bundles.mjs"))) as { findServerCode: (d: string) => Array<{ marker: string }> };
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), "tw-chunks-"));
    fs.mkdirSync(path.join(dir, "chunks"));
    fs.writeFileSync(path.join(dir, "chunks", "a.js"), 'const t=sqliteTable("users",{passwordHash:text("password_hash")});');
    fs.writeFileSync(path.join(dir, "chunks", "b.js"), "console.log(1)");
    expect(findServerCode(dir).map((f) => f.marker).sort()).toEqual(["password_hash", "sqliteTable"]);
    fs.rmSync(dir, { recursive: true, force: true });
    const built = path.join(root, ".next", "static");
    if (fs.existsSync(built)) expect(findServerCode(built)).toEqual([]);
  });
});
