/** A binary answer for immutable, content-addressed data (safe to cache in the browser). */
export function binaryResponse(bytes: Uint8Array): Response {
  return new Response(bytes as unknown as BodyInit, {
    status: 200,
    headers: {
      "content-type": "application/octet-stream",
      "content-length": String(bytes.byteLength),
      "cache-control": "private, max-age=31536000, immutable",
    },
  });
}
