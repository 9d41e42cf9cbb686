/**
 * Signing in to the control room over plain HTTP (no browser), for the load and concurrency
 * figures: next-auth's credentials flow, GET /api/auth/csrf then POST /api/auth/callback/credentials
 * with the CSRF token and its cookie. Returns the Cookie header that carries the session.
 */

/** "name=value" pairs from Set-Cookie headers (attributes dropped), later ones replacing earlier ones. */
export function cookiePairs(setCookies: readonly string[], into: Map<string, string> = new Map()): Map<string, string> {
  for (const line of setCookies) {
    const pair = line.split(";")[0];
    const eq = pair.indexOf("=");
    if (eq > 0) into.set(pair.slice(0, eq).trim(), pair.slice(eq + 1).trim());
  }
  return into;
}

const cookieHeader = (jar: Map<string, string>) => [...jar].map(([k, v]) => `${k}=${v}`).join("; ");

/** Signs `email` in at `origin`; resolves to the Cookie header of the session, or rejects saying why. */
export async function signInOverHttp(origin: string, email: string, password: string): Promise<string> {
  const jar = new Map<string, string>();
  const csrfRes = await fetch(`${origin}/api/auth/csrf`);
  if (!csrfRes.ok) throw new Error(`GET /api/auth/csrf answered ${csrfRes.status}`);
  cookiePairs(csrfRes.headers.getSetCookie(), jar);
  const { csrfToken } = (await csrfRes.json()) as { csrfToken: string };
  const res = await fetch(`${origin}/api/auth/callback/credentials`, {
    method: "POST",
    redirect: "manual",
    headers: { "content-type": "application/x-www-form-urlencoded", cookie: cookieHeader(jar), origin },
    body: new URLSearchParams({ csrfToken, email, password, callbackUrl: `${origin}/runs`, json: "true" }).toString(),
  });
  cookiePairs(res.headers.getSetCookie(), jar);
  await res.arrayBuffer();
  const session = [...jar.keys()].find((k) => k.endsWith("next-auth.session-token"));
  if (!session) throw new Error(`signing in ${email} gave no session cookie (status ${res.status})`);
  return cookieHeader(jar);
}
