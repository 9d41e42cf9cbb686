/** `tracewright runs` and `tracewright show`: what ran, how, with what. */
import type { Command } from "commander";
import { z } from "zod";
import { listRunIntermediates } from "../../db/queries/intermediates";
import { getRun, getStepLogs, listRuns } from "../../db/queries/runs";
import { RUN_STATUSES } from "../../db/schema";
import { AppError } from "../../pipeline/errors";
import { action, formatDuration, openCliDb, parseId, printJson } from "../shared";

const listOptions = z.object({
  status: z.enum(RUN_STATUSES).optional(),
  survey: z.string().optional(),
  pipeline: z.string().optional(),
  by: z.string().optional(),
  page: z.coerce.number().int().positive().default(1),
  limit: z.coerce.number().int().positive().max(500).default(25),
  json: z.boolean().optional(),
});

function pad(s: string, n: number) {
  return s.length > n ? `${s.slice(0, n - 1)}…` : s.padEnd(n);
}

export function registerRuns(program: Command): void {
  program
    .command("runs")
    .description("list runs, newest first")
    .option("--status <status>", `only runs in this state (${RUN_STATUSES.join(", ")})`)
    .option("--survey <slug>", "only runs of this survey")
    .option("--pipeline <name>", "only runs of this pipeline")
    .option("--by <who>", "only runs started by this person (e-mail or OS user)")
    .option("--page <n>", "page number", "1")
    .option("--limit <n>", "runs per page", "25")
    .option("--json", "print JSON with stable keys")
    .action(
      action(async (raw: Record<string, unknown>) => {
        const parsed = listOptions.safeParse(raw);
        if (!parsed.success) {
          const i = parsed.error.issues[0];
          throw new AppError("bad-input", `--${String(i.path[0])}: ${i.message}`, { field: `--${String(i.path[0])}` });
        }
        const o = parsed.data;
        const db = openCliDb();
        const { rows, total } = listRuns(db, {
          status: o.status,
          surveySlug: o.survey,
          pipelineName: o.pipeline,
          startedBy: o.by,
          page: o.page,
          pageSize: o.limit,
        });
        if (o.json) {
          printJson({
            total,
            page: o.page,
            runs: rows.map((r) => ({
              id: r.id,
              status: r.status,
              pipeline: r.pipelineName,
              pipelineVersion: r.pipelineVersion,
              survey: r.surveySlug,
              dataset: r.datasetName,
              datasetHash: r.datasetHash,
              startedBy: r.startedByLabel,
              door: r.door,
              parentRunId: r.parentRunId,
              createdAt: r.createdAt.toISOString(),
              startedAt: r.startedAt?.toISOString() ?? null,
              finishedAt: r.finishedAt?.toISOString() ?? null,
              stepsDone: r.stepsDone,
              stepsTotal: r.stepsTotal,
              cacheHits: r.cacheHits,
              error: r.error,
            })),
          });
          return;
        }
        if (rows.length === 0) {
          const filtered = o.status || o.survey || o.pipeline || o.by;
          process.stdout.write(filtered ? "no runs match these filters\n" : "no runs yet (start one with: tracewright run <pipeline-file>)\n");
          return;
        }
        process.stdout.write(`${pad("run", 6)}${pad("status", 12)}${pad("pipeline", 28)}${pad("steps", 9)}${pad("by", 22)}${pad("door", 8)}started\n`);
        for (const r of rows) {
          const dur = r.startedAt ? formatDuration((r.finishedAt ?? new Date()).getTime() - r.startedAt.getTime()) : "";
          process.stdout.write(
            `${pad(String(r.id) + (r.parentRunId ? "↺" : ""), 6)}${pad(r.status, 12)}${pad(`${r.pipelineName} v${r.pipelineVersion}`, 28)}${pad(`${r.stepsDone}/${r.stepsTotal}`, 9)}${pad(r.startedByLabel, 22)}${pad(r.door, 8)}${r.createdAt.toISOString().slice(0, 16).replace("T", " ")} ${dur}\n`,
          );
        }
        process.stdout.write(`${rows.length} of ${total} runs (page ${o.page})\n`);
      }),
    );

  program
    .command("show")
    .description("show one run: steps, settings, hashes, timings, cache hits, artifacts and logs")
    .argument("<run>", "run number")
    .option("--logs", "include every log line")
    .option("--json", "print JSON with stable keys")
    .action(
      action(async (run: string, opts: { logs?: boolean; json?: boolean }) => {
        const db = openCliDb();
        const id = parseId(run, "run");
        const detail = getRun(db, id);
        if (!detail) throw new AppError("not-found", `Run ${id} does not exist (see tracewright runs)`);
        const logs = opts.logs || opts.json ? getStepLogs(db, { runId: id, limit: 5000 }) : [];
        const intermediates = listRunIntermediates(db, id);
        if (opts.json) {
          printJson({
            id: detail.id,
            status: detail.status,
            error: detail.error,
            pipeline: { name: detail.pipelineName, version: detail.pipelineVersion, versionId: detail.pipelineVersionId },
            dataset: { id: detail.datasetId, name: detail.datasetName, folder: detail.datasetFolder, contentHash: detail.datasetHash },
            survey: detail.surveySlug,
            startedBy: detail.startedByLabel,
            door: detail.door,
            parentRunId: detail.parentRunId,
            rerunFromStep: detail.rerunFromStep,
            overrides: detail.overrides,
            createdAt: detail.createdAt.toISOString(),
            startedAt: detail.startedAt?.toISOString() ?? null,
            finishedAt: detail.finishedAt?.toISOString() ?? null,
            rejectedFiles: detail.rejectedFiles,
            steps: detail.steps.map((s) => ({
              position: s.position,
              label: s.label,
              step: s.stepId,
              stepVersion: s.stepVersion,
              status: s.status,
              cacheHit: s.cacheHit,
              cacheSourceRunId: s.cacheSourceRunId,
              cacheKey: s.cacheKey,
              durationMs: s.durationMs,
              params: s.params,
              inputs: s.inputs,
              inputSources: s.inputSources,
              outputs: s.outputs,
              summary: s.summary,
              error: s.error,
              intermediates: (intermediates.get(s.id) ?? []).map((x) => ({
                kind: x.kind,
                index: x.index,
                label: x.label,
                hash: x.artifactHash,
                meta: x.meta,
                at: x.at.toISOString(),
              })),
            })),
            logs: logs.map((l) => ({ id: l.id, runStepId: l.runStepId, at: l.at.toISOString(), level: l.level, message: l.message })),
          });
          return;
        }
        const out = (s: string) => process.stdout.write(`${s}\n`);
        out(`run ${detail.id}  ${detail.status}${detail.error ? `: ${detail.error}` : ""}`);
        out(`  pipeline   ${detail.pipelineName} v${detail.pipelineVersion}`);
        out(`  dataset    ${detail.datasetName}  ${detail.datasetFolder}  (${detail.datasetHash.slice(0, 12)})`);
        out(`  started by ${detail.startedByLabel} via ${detail.door}  ${detail.createdAt.toISOString()}`);
        if (detail.parentRunId) out(`  rerun of   run ${detail.parentRunId} from ${detail.rerunFromStep} with ${JSON.stringify(detail.overrides)}`);
        for (const f of detail.rejectedFiles) out(`  rejected   ${f.name}: ${f.reason}`);
        out("");
        for (const s of detail.steps) {
          const hit = s.cacheHit ? `cached from run ${s.cacheSourceRunId}` : "";
          out(`  ${s.position + 1}. ${s.label} (${s.stepId} v${s.stepVersion})  ${s.status}  ${formatDuration(s.durationMs)}  ${hit}`);
          out(`     settings ${JSON.stringify(s.params)}`);
          for (const [slot, h] of Object.entries(s.inputs)) {
            const src = s.inputSources[slot];
            out(`     in  ${slot.padEnd(14)} ${h.slice(0, 16)}${src ? `  from ${src.from}${src.explicit ? " (named in the file)" : ""}` : ""}`);
          }
          for (const [slot, h] of Object.entries(s.outputs)) out(`     out ${slot.padEnd(14)} ${h}`);
          if (s.summary) out(`     summary ${JSON.stringify(s.summary)}`);
          for (const x of intermediates.get(s.id) ?? []) {
            out(`     along ${x.kind.padEnd(12)} #${String(x.index).padEnd(5)} ${x.artifactHash}${x.label ? `  ${x.label}` : ""}`);
          }
          if (s.error) out(`     error ${s.error}`);
        }
        if (opts.logs) {
          out("");
          const labels = new Map(detail.steps.map((s) => [s.id, s.label]));
          for (const l of logs) {
            out(`  ${l.at.toISOString().slice(11, 23)} ${l.level.padEnd(5)} ${(l.runStepId ? labels.get(l.runStepId) : "run")?.padEnd(18)} ${l.message}`);
          }
        }
      }),
    );
}
