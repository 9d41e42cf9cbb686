"use client";

import { useEffect, useRef, useState } from "react";
import { getJson, LIVE_POLL_MS } from "@/app/lib/queries";
import type { LogLine } from "@/app/lib/view-types";
import { formatSettingValue, readableName } from "@/app/ui/format";

const LEVEL_STYLE: Record<string, string> = { debug: "text-ink-faint", info: "text-ink", warn: "text-warn", error: "text-bad font-medium" };

/** A step's (or a run's) log lines; new lines stream in while the run is live. Give it a `key` per step so it starts afresh. */
export function LogStream({ runId, runStepId, live }: { runId: number; runStepId?: number; live: boolean }) {
  const [lines, setLines] = useState<LogLine[]>([]);
  const [error, setError] = useState<string | null>(null);
  const [loaded, setLoaded] = useState(false);
  const lastId = useRef(0);
  const box = useRef<HTMLDivElement>(null);

  useEffect(() => {
    let stopped = false;
    lastId.current = 0;
    async function pull() {
      try {
        const q = new URLSearchParams();
        if (runStepId) q.set("step", String(runStepId));
        if (lastId.current) q.set("after", String(lastId.current));
        const res = await getJson<{ lines: LogLine[]; lastId: number }>(`/api/runs/${runId}/logs?${q}`);
        if (stopped) return;
        if (res.lines.length) {
          lastId.current = Math.max(lastId.current, res.lastId);
          // Two pulls can overlap (the first and a poll, or a restart when the run finishes): keep each line once.
          setLines((prev) => {
            const seen = new Set(prev.map((l) => l.id));
            return [...prev, ...res.lines.filter((l) => !seen.has(l.id))].slice(-3000);
          });
        }
        setError(null);
        setLoaded(true);
      } catch (err) {
        if (!stopped) setError(err instanceof Error ? err.message : String(err));
      }
    }
    void pull();
    const id = live ? window.setInterval(pull, LIVE_POLL_MS) : undefined;
    return () => {
      stopped = true;
      if (id) window.clearInterval(id);
    };
  }, [runId, runStepId, live]);

  useEffect(() => {
    const el = box.current;
    if (el && live) el.scrollTop = el.scrollHeight;
  }, [lines, live]);

  return (
    <div>
      {error ? <p className="text-xs text-bad">{error}</p> : null}
      <div ref={box} className="max-h-72 overflow-auto rounded-md border border-line bg-ground/60 p-2 font-mono text-[12px] leading-5" data-testid="log-lines" aria-live={live ? "polite" : undefined}>
        {lines.length === 0 ? <p className="muted">{!loaded ? "Loading the log…" : live ? "Waiting for log lines…" : "No log lines."}</p> : null}
        {lines.map((l) => (
          <div key={l.id} className={LEVEL_STYLE[l.level]}>
            <span className="text-ink-faint">{new Date(l.at).toLocaleTimeString("en-GB")}</span> <span className="uppercase">{l.level.padEnd(5)}</span> {l.message}
            {l.data ? <LogDetails data={l.data} /> : null}
          </div>
        ))}
      </div>
    </div>
  );
}

/** The structured details of a log line (what the terminal prints after the message), readable and rounded. */
export function LogDetails({ data }: { data: Record<string, unknown> }) {
  const entries = Object.entries(data).filter(([k, v]) => v !== undefined && k !== "stack");
  if (entries.length === 0) return null;
  return (
    <span className="ml-1 text-ink-soft" data-testid="log-details">
      {entries.map(([k, v], i) => {
        const { words, unit } = readableName(k);
        return (
          <span key={k} title={k}>
            {i ? " · " : "— "}
            {words}: {formatSettingValue(v, unit)}
          </span>
        );
      })}
    </span>
  );
}
