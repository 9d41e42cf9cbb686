/**
 * Where to go after signing in: only a path of this site, parsed with the WHATWG URL parser (the
 * one browsers use), never judged by its first characters. "/\\evil.example" and
 * "/\t/evil.example" both parse as another host, since the parser reads a backslash as a slash and
 * drops tabs and newlines.
 */

/** Stand-in origin used only to resolve relative paths; never shown or followed. */
const BASE = "http://tracewright.invalid";

/** Path (with query and fragment) to go to after sign-in, or `fallback` unless `raw` stays on this site. */
export function safeNextPath(raw: string | null | undefined, fallback = "/runs"): string {
  if (!raw || raw.length > 2000 || !raw.startsWith("/")) return fallback;
  let url: URL;
  try {
    url = new URL(raw, BASE);
  } catch {
    return fallback;
  }
  if (url.origin !== BASE) return fallback;
  const path = `${url.pathname}${url.search}${url.hash}`;
  // A path that parses to a scheme-relative URL elsewhere ("//host") is refused as well.
  return path.startsWith("//") ? fallback : path;
}

/**
 * next-auth's redirect rule: a relative path or an absolute URL on `baseUrl`'s origin is kept
 * (as a same-site path), anything else, malformed or foreign, goes to `baseUrl` + "/runs".
 */
export function safeAuthRedirect(url: string, baseUrl: string): string {
  let base: URL;
  try {
    base = new URL(baseUrl);
  } catch {
    return "/runs";
  }
  const home = `${base.origin}/runs`;
  let target: URL;
  try {
    target = new URL(url, base);
  } catch {
    return home;
  }
  if (target.origin !== base.origin) return home;
  const path = safeNextPath(`${target.pathname}${target.search}${target.hash}`, "/runs");
  return `${base.origin}${path}`;
}
