/** @type {import('next').NextConfig} */
const nextConfig = {
  // Native and worker-spawning packages stay outside the server bundle (pdfkit reads its font
  // metrics from its own folder at run time).
  serverExternalPackages: ["better-sqlite3", "pino", "piscina", "tsx", "pdfkit", "bullmq"],
  poweredByHeader: false,
  reactStrictMode: true,
  // forbidden() renders app/forbidden.tsx for pages a role may not see.
  experimental: { authInterrupts: true },
  // Static security headers on every answer; the content security policy (with a per-request
  // nonce) is set in proxy.ts.
  async headers() {
    return [
      {
        source: "/:path*",
        headers: [
          { key: "X-Content-Type-Options", value: "nosniff" },
          { key: "X-Frame-Options", value: "DENY" },
          { key: "Referrer-Policy", value: "strict-origin-when-cross-origin" },
        ],
      },
    ];
  },
};

export default nextConfig;
