/**
 * Terminal progress for a run: a progress bar per step (cli-progress) when the terminal is
 * interactive, plain log lines otherwise.
 */
import cliProgress from "cli-progress";
import type { RunEvents } from "../pipeline/runner";
import { formatDuration } from "./shared";

/** Run events that draw progress in the terminal. `quiet` prints only step ends and warnings. */
export function terminalProgress(opts: { interactive: boolean; quiet?: boolean; verbose?: boolean }): RunEvents & { stop(): void } {
  let bar: cliProgress.SingleBar | null = null;
  const stopBar = () => {
    bar?.stop();
    bar = null;
  };
  const write = (line: string) => {
    if (bar) {
      // keep the bar intact: clear its line, print, redraw
      process.stderr.write(`\r\x1b[2K${line}\n`);
      bar.render?.();
    } else {
      process.stderr.write(`${line}\n`);
    }
  };
  return {
    onRunStart: ({ runId, steps }) => {
      if (!opts.quiet) process.stderr.write(`run ${runId}: ${steps.map((s) => s.label).join(" > ")}\n`);
    },
    onStepStart: ({ position, label, total }) => {
      if (opts.interactive && !opts.quiet) {
        bar = new cliProgress.SingleBar(
          {
            format: `  [${position + 1}/${total}] ${label.padEnd(18)} {bar} {percentage}% {note}`,
            barCompleteChar: "█",
            barIncompleteChar: "░",
            hideCursor: true,
            clearOnComplete: true,
            stream: process.stderr,
          },
          cliProgress.Presets.shades_classic,
        );
        bar.start(100, 0, { note: "" });
      } else if (!opts.quiet) {
        process.stderr.write(`  [${position + 1}/${total}] ${label} ...\n`);
      }
    },
    onStepProgress: ({ fraction, message }) => {
      bar?.update(Math.round(fraction * 100), { note: message ?? "" });
    },
    onStepEnd: ({ position, label, status, cacheHit, durationMs, error }) => {
      stopBar();
      const mark = status === "succeeded" ? (cacheHit ? "cached" : "done") : status;
      process.stderr.write(
        `  [${position + 1}] ${label.padEnd(18)} ${mark.padEnd(9)} ${formatDuration(durationMs)}${error ? `  ${error}` : ""}\n`,
      );
    },
    onLog: ({ label, level, message }) => {
      if (level === "warn" || level === "error" || opts.verbose) write(`    ${level === "info" ? "" : `${level}: `}${label ? `${label}: ` : ""}${message}`);
    },
    stop: stopBar,
  };
}
