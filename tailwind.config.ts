import type { Config } from "tailwindcss";

/**
 * The control room's palette: a calm slate ground, one ink-blue accent, and status colours
 * that stay readable for common colour-vision deficiencies (blue/orange rather than red/green alone).
 */
const config: Config = {
  content: ["./app/**/*.{ts,tsx}"],
  theme: {
    extend: {
      fontFamily: {
        sans: ["var(--font-plex-sans)", "system-ui", "sans-serif"],
        mono: ["var(--font-plex-mono)", "ui-monospace", "monospace"],
      },
      colors: {
        ground: "#f5f6f4",
        panel: "#ffffff",
        line: "#dde1dc",
        ink: { DEFAULT: "#1c2326", soft: "#4a5559", faint: "#7b878b" },
        accent: { DEFAULT: "#1f5f8b", soft: "#e3eef5", strong: "#164766" },
        ok: { DEFAULT: "#2f7a4f", soft: "#e4f2e9" },
        warn: { DEFAULT: "#a4620f", soft: "#fbf0de" },
        bad: { DEFAULT: "#b23a2e", soft: "#f8e5e2" },
      },
    },
  },
};

export default config;
