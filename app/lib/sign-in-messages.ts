/** Words of the sign-in form, shared by the server (next-auth) and the form; imports nothing. */

/** Start of the error next-auth reports for a throttled sign-in; the seconds to wait follow. */
export const THROTTLED_PREFIX = "throttled:";

/** The one answer for an unknown account, a deactivated one and a wrong password. */
export const REFUSED_MESSAGE = "Email or password not recognised, or the account is deactivated.";

/** What the form shows for next-auth's `error` value. */
export function signInErrorMessage(error: string): string {
  if (error.startsWith(THROTTLED_PREFIX)) {
    const s = Number(error.slice(THROTTLED_PREFIX.length));
    const minutes = Number.isFinite(s) && s > 0 ? Math.ceil(s / 60) : 15;
    return `Too many sign-in attempts. Try again in ${minutes} minute${minutes === 1 ? "" : "s"}.`;
  }
  return REFUSED_MESSAGE;
}
