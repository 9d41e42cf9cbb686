/**
 * Delivers the mail notice outbox (db/queries/notices.ts) through nodemailer. The web server
 * calls it on a short interval, the command line at the end of a run. Each notice is claimed
 * before sending so two senders never mail it twice; a failure is recorded on the notice and
 * retried by the next pass (up to five attempts).
 *
 * SMTP comes from TRACEWRIGHT_SMTP_HOST and TRACEWRIGHT_SMTP_PORT (plain SMTP, no TLS: a local
 * relay, or the fake catcher of the demo and the tests). Without a host nothing is sent and the
 * notices wait.
 */
import nodemailer, { type Transporter } from "nodemailer";
import type { Db } from "../db/client";
import { claimNotice, listUnsentNotices, markNoticeFailed, markNoticeSent } from "../db/queries/notices";

/** Outcome of a send attempt. */
export type MailOutcome = { sent: true } | { sent: false; reason: string };

/** The SMTP settings from the environment, or null when mail is not set up. */
export function smtpSettings(): { host: string; port: number; from: string } | null {
  const host = process.env.TRACEWRIGHT_SMTP_HOST;
  if (!host) return null;
  const port = Number(process.env.TRACEWRIGHT_SMTP_PORT ?? 25);
  return { host, port, from: process.env.TRACEWRIGHT_MAIL_FROM ?? "Tracewright <tracewright@localhost>" };
}

function transportOrReason(): { transport: Transporter; from: string } | { reason: string } {
  const smtp = smtpSettings();
  if (!smtp) return { reason: "no SMTP server is configured (TRACEWRIGHT_SMTP_HOST)" };
  if (!Number.isInteger(smtp.port) || smtp.port <= 0 || smtp.port > 65535) return { reason: "TRACEWRIGHT_SMTP_PORT is not a port number" };
  return {
    transport: nodemailer.createTransport({ host: smtp.host, port: smtp.port, secure: false, ignoreTLS: true, connectionTimeout: 5_000 }),
    from: smtp.from,
  };
}

const reasonOf = (err: unknown) => `the mail server refused or could not be reached (${err instanceof Error ? err.message : String(err)})`;

/** Sends one plain-text message now; never throws. */
export async function sendMail(msg: { to: string; subject: string; text: string }): Promise<MailOutcome> {
  const t = transportOrReason();
  if ("reason" in t) return { sent: false, reason: t.reason };
  try {
    await t.transport.sendMail({ from: t.from, to: msg.to, subject: msg.subject, text: msg.text });
    return { sent: true };
  } catch (err) {
    return { sent: false, reason: reasonOf(err) };
  } finally {
    t.transport.close();
  }
}

/** Sends the notices waiting in the outbox; answers how many went and how many failed. Never throws. */
export async function deliverNotices(db: Db, opts: { limit?: number } = {}): Promise<{ sent: number; failed: number; skipped?: string }> {
  const waiting = listUnsentNotices(db, opts.limit ?? 50);
  if (waiting.length === 0) return { sent: 0, failed: 0 };
  const t = transportOrReason();
  if ("reason" in t) return { sent: 0, failed: 0, skipped: t.reason };
  let sent = 0;
  let failed = 0;
  try {
    for (const n of waiting) {
      if (!claimNotice(db, n.id)) continue;
      try {
        await t.transport.sendMail({ from: t.from, to: n.toAddress, subject: n.subject, text: n.body });
        markNoticeSent(db, n.id);
        sent++;
      } catch (err) {
        markNoticeFailed(db, n.id, reasonOf(err));
        failed++;
      }
    }
  } finally {
    t.transport.close();
  }
  return { sent, failed };
}
