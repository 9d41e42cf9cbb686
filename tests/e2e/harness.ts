/**
 * Browser-test plumbing: a temporary data folder prepared by the demo script, a mail catcher,
 * `next start` on a free port, and Debian's chromium driven by playwright-core.
 */
import crypto from "node:crypto";
import fs from "node:fs";
import net from "node:net";
import os from "node:os";
import path from "node:path";
import { execa, type ResultPromise } from "execa";
import { chromium, type BrowserContext, type Page } from "playwright-core";

export const projectRoot = path.resolve(import.meta.dirname, "..", "..");
export const CHROMIUM = process.env.TRACEWRIGHT_CHROMIUM ?? "/usr/bin/chromium";

/** A free TCP port on loopback. */
export async function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = net.createServer();
    srv.listen(0, "127.0.0.1", () => {
      const port = (srv.address() as net.AddressInfo).port;
      srv.close(() => resolve(port));
    });
    srv.on("error", reject);
  });
}

export type { CaughtMail as CapturedMail } from "../helpers/mail-catcher";
/** An SMTP server on 127.0.0.1 (port 0) that keeps every message. */
export { startCatcher as startMailCatcher } from "../helpers/mail-catcher";

/** Prepares a data folder with the demo script (`--prepare-only`). */
export async function prepareData(dir: string): Promise<void> {
  const r = await execa(process.execPath, ["--import", "tsx", path.join(projectRoot, "scripts", "demo.ts"), "--prepare-only"], {
    cwd: projectRoot,
    env: { ...process.env, TRACEWRIGHT_DATA_DIR: dir, TRACEWRIGHT_DB: path.join(dir, "tracewright.db") },
    reject: false,
    all: true,
  });
  if (r.exitCode !== 0) throw new Error(`preparing demo data failed:\n${r.all}`);
}

function newestMtime(p: string): number {
  if (!fs.existsSync(p)) return 0;
  const st = fs.statSync(p);
  if (!st.isDirectory()) return st.mtimeMs;
  let newest = 0;
  for (const e of fs.readdirSync(p)) if (e !== "node_modules" && !e.startsWith(".")) newest = Math.max(newest, newestMtime(path.join(p, e)));
  return newest;
}

/** Builds the app when there is no build yet or a source is newer than it. */
export async function ensureBuild(): Promise<void> {
  const buildId = path.join(projectRoot, ".next", "BUILD_ID");
  const sources = ["app", "db", "pipeline", "proxy.ts", "next.config.mjs", "tailwind.config.ts"].map((f) => newestMtime(path.join(projectRoot, f)));
  if (fs.existsSync(buildId) && fs.statSync(buildId).mtimeMs >= Math.max(...sources)) return;
  const r = await execa(path.join(projectRoot, "node_modules", ".bin", "next"), ["build"], {
    cwd: projectRoot,
    env: { ...process.env, NEXT_TELEMETRY_DISABLED: "1" },
    reject: false,
    all: true,
  });
  if (r.exitCode !== 0) throw new Error(`next build failed:\n${r.all}`);
}

/** Starts `next start` on a free port with its own secret and data folder; resolves when it answers. */
export async function startServer(dataDir: string, env: Record<string, string>): Promise<{ origin: string; process: ResultPromise; stop: () => Promise<void> }> {
  const port = await freePort();
  const origin = `http://127.0.0.1:${port}`;
  const child = execa(path.join(projectRoot, "node_modules", ".bin", "next"), ["start", "-H", "127.0.0.1", "-p", String(port)], {
    cwd: projectRoot,
    env: {
      ...process.env,
      ...env,
      TRACEWRIGHT_DATA_DIR: dataDir,
      TRACEWRIGHT_DB: path.join(dataDir, "tracewright.db"),
      NEXTAUTH_URL: origin,
      NEXTAUTH_SECRET: crypto.randomBytes(32).toString("base64url"),
      NEXT_TELEMETRY_DISABLED: "1",
    },
    reject: false,
    all: true,
  });
  const deadline = Date.now() + 30_000;
  for (;;) {
    try {
      const res = await fetch(`${origin}/sign-in`);
      if (res.ok) break;
    } catch {
      // not up yet
    }
    if (Date.now() > deadline) throw new Error(`next start did not answer on ${origin}`);
    await new Promise((r) => setTimeout(r, 250));
  }
  return {
    origin,
    process: child,
    stop: async () => {
      if (child.pid) process.kill(child.pid, "SIGTERM");
      await child.catch(() => undefined);
    },
  };
}

/** A fresh persistent chromium context (own user-data-dir). */
export async function startBrowser(): Promise<{ context: BrowserContext; close: () => Promise<void> }> {
  const userDataDir = fs.mkdtempSync(path.join(os.tmpdir(), "tw-chromium-"));
  const context = await chromium.launchPersistentContext(userDataDir, {
    executablePath: CHROMIUM,
    headless: true,
    args: [
      "--headless",
      "--no-sandbox",
      "--disable-gpu",
      "--disable-quic",
      "--no-first-run",
      "--disable-background-networking",
      "--disable-component-update",
      "--disable-sync",
    ],
    viewport: { width: 1440, height: 900 },
    locale: "en-GB",
  });
  return {
    context,
    close: async () => {
      await context.close();
      fs.rmSync(userDataDir, { recursive: true, force: true });
    },
  };
}

/** Signs in through the sign-in page and waits for the runs table. */
export async function signIn(page: Page, origin: string, email: string, password: string): Promise<void> {
  await page.context().clearCookies();
  await page.goto(`${origin}/sign-in`);
  await page.fill("#email", email);
  await page.fill("#password", password);
  await page.click("button[type=submit]");
  await page.waitForURL(/\/runs/, { timeout: 20_000 });
  await page.waitForSelector("[data-testid=runs-table]");
}

/** Time from navigation start to the load event, ms (Navigation Timing Level 2). */
export async function pageLoadMs(page: Page): Promise<number> {
  return page.evaluate(() => {
    const nav = performance.getEntriesByType("navigation")[0] as PerformanceNavigationTiming | undefined;
    return nav ? nav.loadEventEnd - nav.startTime : NaN;
  });
}
