/**
 * An SMTP server on 127.0.0.1 that keeps every message (smtp-server, the same catcher the browser
 * tests use), and a reader of the plain-text part of a captured message.
 */
import type net from "node:net";
import { SMTPServer } from "smtp-server";

export interface CaughtMail {
  to: string[];
  raw: string;
}

/** Starts a catcher on a free port. */
export async function startCatcher(): Promise<{ port: number; messages: CaughtMail[]; close: () => Promise<void> }> {
  const messages: CaughtMail[] = [];
  const server = new SMTPServer({
    authOptional: true,
    disabledCommands: ["STARTTLS"],
    logger: false,
    onData(stream, session, callback) {
      const chunks: Buffer[] = [];
      stream.on("data", (c: Buffer) => chunks.push(c));
      stream.on("end", () => {
        messages.push({ to: session.envelope.rcptTo.map((r) => r.address), raw: Buffer.concat(chunks).toString("utf8") });
        callback();
      });
    },
  });
  await new Promise<void>((resolve) => server.listen(0, "127.0.0.1", () => resolve()));
  const port = (server.server.address() as net.AddressInfo).port;
  return { port, messages, close: () => new Promise((resolve) => server.close(() => resolve())) };
}

/**
 * The message with headers unfolded and the body's quoted-printable soft line breaks and escapes
 * undone (RFC 5322 §2.2.3 folding; RFC 2045 §6.7 quoted-printable), enough to search its words.
 */
export function readable(raw: string): string {
  return raw
    .replace(/\r\n[ \t]+/g, " ")
    .replace(/=\r?\n/g, "")
    .replace(/=([0-9A-F]{2})/g, (_m, h: string) => String.fromCharCode(parseInt(h, 16)));
}

/** Waits until `pick` finds a message (the sender may run after the answer), up to `ms`. */
export async function waitForMail(messages: CaughtMail[], pick: (m: CaughtMail) => boolean, ms = 5000): Promise<CaughtMail> {
  const end = Date.now() + ms;
  for (;;) {
    const m = messages.find(pick);
    if (m) return m;
    if (Date.now() > end) throw new Error(`no such mail arrived within ${ms} ms (${messages.length} caught)`);
    await new Promise((r) => setTimeout(r, 25));
  }
}
