/**
 * Outgoing mail (invitations). SMTP host and port come from TRACEWRIGHT_SMTP_HOST and
 * TRACEWRIGHT_SMTP_PORT (plain SMTP, no TLS: meant for a local relay). Without a host the
 * message is not sent and the caller shows the temporary password to the administrator.
 */
import "server-only";
import nodemailer from "nodemailer";

/** Outcome of a send attempt. */
export type MailOutcome = { sent: true } | { sent: false; reason: string };

/** The SMTP settings from the environment, or null when mail is not set up. */
export function smtpSettings(): { host: string; port: number; from: string } | null {
  const host = process.env.TRACEWRIGHT_SMTP_HOST;
  if (!host) return null;
  const port = Number(process.env.TRACEWRIGHT_SMTP_PORT ?? 25);
  return { host, port, from: process.env.TRACEWRIGHT_MAIL_FROM ?? "Tracewright <tracewright@localhost>" };
}

/** Sends an invitation with a temporary password; never throws. */
export async function sendInvitation(input: {
  to: string;
  name: string;
  role: string;
  temporaryPassword: string;
  signInUrl: string;
  invitedBy: string;
}): Promise<MailOutcome> {
  const smtp = smtpSettings();
  if (!smtp) return { sent: false, reason: "no SMTP server is configured (TRACEWRIGHT_SMTP_HOST)" };
  if (!Number.isInteger(smtp.port) || smtp.port <= 0) return { sent: false, reason: `TRACEWRIGHT_SMTP_PORT is not a port number` };
  const transport = nodemailer.createTransport({
    host: smtp.host,
    port: smtp.port,
    secure: false,
    ignoreTLS: true,
    connectionTimeout: 5_000,
  });
  try {
    await transport.sendMail({
      from: smtp.from,
      to: input.to,
      subject: "Your Tracewright control room account",
      text: [
        `Hello ${input.name},`,
        "",
        `${input.invitedBy} has added you to the Tracewright control room as ${input.role}.`,
        `Sign in at ${input.signInUrl} with this email and the temporary password:`,
        "",
        `    ${input.temporaryPassword}`,
        "",
        "Ask your administrator to set a new password after your first sign-in.",
      ].join("\n"),
    });
    return { sent: true };
  } catch (err) {
    return { sent: false, reason: `the mail server refused or could not be reached (${err instanceof Error ? err.message : String(err)})` };
  } finally {
    transport.close();
  }
}
