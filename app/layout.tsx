import type { Metadata } from "next";
import "./globals.css";
import { plexMono, plexSans } from "./fonts";
import { QueryProvider } from "./ui/query-provider";

export const metadata: Metadata = {
  title: { default: "Tracewright control room", template: "%s · Tracewright" },
  description: "Runs, parameters, traces and models of near-surface seismic processing.",
};

export default function RootLayout({ children }: { children: React.ReactNode }) {
  return (
    <html lang="en-GB" className={`${plexSans.variable} ${plexMono.variable}`}>
      <body>
        <QueryProvider>{children}</QueryProvider>
      </body>
    </html>
  );
}
