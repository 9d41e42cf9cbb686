/** @type {import('next').NextConfig} */
const nextConfig = {
  // Native and worker-spawning packages stay outside the server bundle.
  serverExternalPackages: ["better-sqlite3", "pino", "piscina", "tsx"],
  poweredByHeader: false,
  reactStrictMode: true,
  // forbidden() renders app/forbidden.tsx for pages a role may not see.
  experimental: { authInterrupts: true },
};

export default nextConfig;
