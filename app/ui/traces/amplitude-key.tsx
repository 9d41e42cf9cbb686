import { DENSITY_NEGATIVE_RGB, DENSITY_POSITIVE_RGB, type DisplaySettings } from "./draw-traces";

const rgb = (c: readonly number[]) => `rgb(${c[0]},${c[1]},${c[2]})`;

/**
 * The key of a trace display: the density colour bar (blue negative, white zero, red positive,
 * saturating at ±reference ÷ gain) and the wiggle polarity (positive to the right, filled).
 */
export function AmplitudeKey({ settings, reference }: { settings: DisplaySettings; reference: "trace" | "gather" | "common" }) {
  const ref = reference === "trace" ? "each trace's peak" : reference === "gather" ? "the gather's peak" : "the common scale's peak";
  const sat = 1 / settings.gain;
  const satText = `${sat >= 1 ? sat.toFixed(1) : sat.toFixed(2)} × ${ref}`;
  return (
    <div className="flex flex-wrap items-center gap-x-6 gap-y-1 text-[11px] text-ink-soft" data-testid="amplitude-key">
      {settings.mode !== "wiggle" ? (
        <div className="flex items-center gap-2">
          <span>Density:</span>
          <span className="tabular-nums">−{satText}</span>
          <span
            className="inline-block h-3 w-40 rounded-sm border border-line"
            style={{ background: `linear-gradient(to right, ${rgb(DENSITY_NEGATIVE_RGB)}, #ffffff, ${rgb(DENSITY_POSITIVE_RGB)})` }}
            role="img"
            aria-label="Colour bar: blue negative, white zero, red positive"
          />
          <span className="tabular-nums">+{satText}</span>
          <span className="muted">(0 white; beyond the ends the colour saturates)</span>
        </div>
      ) : null}
      {settings.mode !== "density" ? (
        <div className="flex items-center gap-2">
          <span>Wiggles:</span>
          <svg width="34" height="14" aria-hidden>
            <line x1="8" y1="0" x2="8" y2="14" stroke="#9aa3a6" strokeWidth="1" />
            <path d="M8 1 C 8 4, 22 4, 22 7 C 22 10, 8 10, 8 13 Z" fill="#1c2326" />
          </svg>
          <span>positive to the right{settings.mode === "wiggle" ? ", filled" : ""}; clipped at {settings.clip.toFixed(1)} trace spacings</span>
        </div>
      ) : null}
    </div>
  );
}
