/**
 * The secret that signs session tokens. Taken from NEXTAUTH_SECRET when set; otherwise read
 * from (or generated once into) <data folder>/auth-secret so the demo works out of the box.
 * Also defaults NEXTAUTH_URL to the demo origin when it is not set.
 */
import crypto from "node:crypto";
import fs from "node:fs";
import path from "node:path";
import { dataDir } from "@/db/paths";

/** The origin the demo serves on (`npm run demo`, `npm start`). */
export const DEMO_ORIGIN = "http://127.0.0.1:3000";

/** Returns the session-signing secret, creating data/auth-secret on first use if the env lacks one. */
export function authSecret(): string {
  const fromEnv = process.env.NEXTAUTH_SECRET;
  if (fromEnv && fromEnv.length > 0) return fromEnv;
  const file = path.join(dataDir(), "auth-secret");
  let secret: string;
  try {
    secret = fs.readFileSync(file, "utf8").trim();
  } catch {
    fs.mkdirSync(path.dirname(file), { recursive: true });
    const fresh = crypto.randomBytes(32).toString("base64url");
    try {
      // "wx": if another process wrote it first, keep theirs.
      fs.writeFileSync(file, fresh + "\n", { flag: "wx", mode: 0o600 });
      secret = fresh;
    } catch {
      secret = fs.readFileSync(file, "utf8").trim();
    }
  }
  process.env.NEXTAUTH_SECRET = secret;
  process.env.NEXTAUTH_URL ??= DEMO_ORIGIN;
  return secret;
}
