/**
 * The mail to the field lead when a field check finds something that needs a reshoot before the
 * crew leaves. Sent from the engine's side (the watcher's door), so it cannot use the control
 * room's mailer: the same environment settings, its own small sender.
 *
 * SMTP host and port come from TRACEWRIGHT_SMTP_HOST and TRACEWRIGHT_SMTP_PORT (plain SMTP, no
 * TLS: meant for a local relay), the sender from TRACEWRIGHT_MAIL_FROM. Without a host nothing is
 * sent and the outcome says why.
 */
import nodemailer from "nodemailer";
import type { Db } from "../db/client";
import { getRun } from "../db/queries/runs";
import { readArtifactSync } from "./artifact-store";
import type { FieldCheckReport } from "./steps/field-check";
import type { JsonDocument } from "./types";

/** Outcome of a send attempt. */
export type FieldMailOutcome = { sent: true; subject: string } | { sent: false; reason: string };

/** Subject and body of the mail for a report, or null when nothing needs a reshoot. */
export function fieldCheckMail(input: { report: FieldCheckReport; folder: string; runId: number; pageUrl?: string }): { subject: string; text: string } | null {
  const { report, folder, runId } = input;
  const urgent = report.findings.filter((f) => f.verdict === "reshoot");
  if (urgent.length === 0) return null;
  const others = report.findings.filter((f) => f.verdict !== "reshoot");
  const name = folder.split(/[\\/]/).filter(Boolean).pop() ?? folder;
  const subject = `Field check ${name}: ${urgent.length} ${urgent.length === 1 ? "finding needs" : "findings need"} action before the crew leaves`;
  const lines = [
    `The field check of ${folder} (run ${runId}, ${report.counts.shots} records) found ${urgent.length} ${urgent.length === 1 ? "thing" : "things"} to put right before the crew leaves the site:`,
    "",
    ...urgent.map((f, i) => `${i + 1}. ${f.message}`),
  ];
  if (others.length > 0) lines.push("", `Also worth a look (no reshoot needed):`, "", ...others.map((f) => `- ${f.message}`));
  lines.push(
    "",
    `Records to reshoot or check: ${report.counts.shotsReshoot} of ${report.counts.shots}; records with warnings: ${report.counts.shotsWarn}.`,
  );
  if (input.pageUrl) lines.push(`Every record, channel and reason: ${input.pageUrl}`);
  lines.push("", "Sent by Tracewright's folder watcher.");
  return { subject, text: lines.join("\n") };
}

/** The field-check report of a run (its last field-check step), or null when it has none. */
export function fieldCheckOfRun(db: Db, runId: number): FieldCheckReport | null {
  const run = getRun(db, runId);
  const step = run?.steps.filter((s) => s.stepId === "field-check" && s.status === "succeeded").pop();
  const hash = step?.outputs.report;
  if (!hash) return null;
  const doc = readArtifactSync(hash) as JsonDocument;
  return doc.role === "field-check" ? (doc.data as FieldCheckReport) : null;
}

/** Sends the mail for a report when something needs a reshoot; never throws. */
export async function sendFieldCheckMail(input: { to: string; report: FieldCheckReport; folder: string; runId: number; pageUrl?: string }): Promise<FieldMailOutcome> {
  const mail = fieldCheckMail(input);
  if (!mail) return { sent: false, reason: "nothing needs a reshoot" };
  const host = process.env.TRACEWRIGHT_SMTP_HOST;
  if (!host) return { sent: false, reason: "no SMTP server is configured (TRACEWRIGHT_SMTP_HOST)" };
  const port = Number(process.env.TRACEWRIGHT_SMTP_PORT ?? 25);
  if (!Number.isInteger(port) || port <= 0) return { sent: false, reason: `TRACEWRIGHT_SMTP_PORT is not a port number` };
  const transport = nodemailer.createTransport({ host, port, secure: false, ignoreTLS: true, connectionTimeout: 5_000 });
  try {
    await transport.sendMail({ from: process.env.TRACEWRIGHT_MAIL_FROM ?? "Tracewright <tracewright@localhost>", to: input.to, subject: mail.subject, text: mail.text });
    return { sent: true, subject: mail.subject };
  } catch (err) {
    return { sent: false, reason: `the mail server refused or could not be reached (${err instanceof Error ? err.message : String(err)})` };
  } finally {
    transport.close();
  }
}
