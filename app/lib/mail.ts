/**
 * Outgoing mail of the control room: invitations (a link to set one's password, or a temporary
 * password when no mail server is set up) and password-reset links. Transport and settings are
 * the engine's (pipeline/notice-sender.ts), so the command line and the web send the same way.
 */
import "server-only";
import { sendMail, smtpSettings, type MailOutcome } from "@/pipeline/notice-sender";

export { smtpSettings, type MailOutcome };

/** "<what> with this link (it works once, until <UTC time>):", the link indented, a blank line. */
function linkLines(what: string, link: string, expiresAt: Date): string[] {
  return [`${what} with this link (it works once, until ${expiresAt.toISOString().slice(0, 16).replace("T", " ")} UTC):`, "", `    ${link}`, ""];
}

/** Sends an invitation with a link that sets the person's password; never throws. */
export async function sendInvitationLink(input: { to: string; name: string; role: string; link: string; expiresAt: Date; invitedBy: string }): Promise<MailOutcome> {
  return sendMail({
    to: input.to,
    subject: "Your Tracewright control room account",
    text: [
      `Hello ${input.name},`,
      "",
      `${input.invitedBy} has added you to the Tracewright control room as ${input.role}.`,
      ...linkLines("Choose your password", input.link, input.expiresAt),
      "Then sign in with this e-mail address and the password you chose.",
    ].join("\n"),
  });
}

/** Sends a password-reset link; never throws. */
export async function sendPasswordResetLink(input: { to: string; name: string; link: string; expiresAt: Date }): Promise<MailOutcome> {
  return sendMail({
    to: input.to,
    subject: "Reset your Tracewright password",
    text: [
      `Hello ${input.name},`,
      "",
      "Someone (we hope you) asked to reset the password of your Tracewright control room account.",
      ...linkLines("Choose a new password", input.link, input.expiresAt),
      "If you did not ask for this, ignore this mail: your password stays as it is.",
    ].join("\n"),
  });
}

/** Sends an invitation with a temporary password (the fallback when links cannot be mailed); never throws. */
export async function sendInvitation(input: {
  to: string;
  name: string;
  role: string;
  temporaryPassword: string;
  signInUrl: string;
  invitedBy: string;
}): Promise<MailOutcome> {
  return sendMail({
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
      "You will be asked to choose your own password after your first sign-in.",
    ].join("\n"),
  });
}
