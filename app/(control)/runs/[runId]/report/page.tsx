import type { Metadata } from "next";
import Link from "next/link";
import { notFound } from "next/navigation";
import { idSchema } from "@/app/lib/api";
import { pageUserWith } from "@/app/lib/page-user";
import { can } from "@/app/lib/permissions";
import { readReportPage } from "@/app/lib/report-reads";
import { FigureSvg } from "@/app/ui/report/figure-svg";
import { InterpretationForm } from "@/app/ui/report/interpretation-form";
import { MakeReportForm } from "@/app/ui/report/make-report-form";
import { depthProfilesFigure, gatherFigure, misfitFigure, modelFigure, valueRange } from "@/pipeline/report/figures";
import { formatUtc, vsRangeWords } from "@/pipeline/report/words";

export const dynamic = "force-dynamic";

export async function generateMetadata({ params }: { params: Promise<{ runId: string }> }): Promise<Metadata> {
  return { title: `Report of run ${(await params).runId}` };
}

/** Panel width in points, as on the PDF's A4 page (595 pt less two 56 pt margins). */
const W = 483;
const m = (v: number) => `${+v.toFixed(2)} m`;

function Rows({ rows }: { rows: Array<[string, string]> }) {
  return (
    <dl className="grid grid-cols-[12rem_1fr] gap-x-4 gap-y-1 text-sm">
      {rows.map(([k, v]) => (
        <div key={k} className="contents">
          <dt className="muted">{k}</dt>
          <dd className={/^[0-9a-f]{64}$/.test(v) ? "break-all font-mono text-xs" : ""}>{v}</dd>
        </div>
      ))}
    </dl>
  );
}

/**
 * The client report of a run as a print-friendly page: the same sections and panels as the PDF.
 * A lead of an approved run also writes the interpretation here, chooses the depth-profile
 * positions and shots, and makes the PDF; everyone who reads runs downloads stored reports.
 */
export default async function ReportPage({ params, searchParams }: { params: Promise<{ runId: string }>; searchParams: Promise<{ positions?: string; shots?: string }> }) {
  const user = await pageUserWith("runs.read");
  const id = idSchema.safeParse((await params).runId);
  if (!id.success) notFound();
  const q = await searchParams;
  const positions = (q.positions ?? "")
    .split(",")
    .map((s) => s.trim())
    .filter(Boolean)
    .map(Number)
    .filter(Number.isFinite);
  const shots = (q.shots ?? "").split(",").map((s) => s.trim()).filter(Boolean);
  const data = readReportPage(id.data, { profilePositionsM: positions.length ? positions : undefined, fitShots: shots.length ? shots : undefined });
  const lead = can(user.role, "runs.review");
  const c = data.content;
  return (
    <div className="space-y-6">
      <div className="flex items-center gap-4 print:hidden">
        <Link href={`/runs/${id.data}`} className="text-sm underline">Run {id.data}</Link>
        <h1 className="text-lg font-semibold">Client report</h1>
      </div>
      <section className="card grid gap-6 p-4 print:hidden md:grid-cols-2" aria-label="Report controls">
        <div className="space-y-2 text-sm">
          <h2 className="font-medium">Stored reports</h2>
          {data.reports.length === 0 ? <p className="muted">No report has been made of this run.</p> : null}
          <ul className="space-y-1" data-testid="stored-reports">
            {data.reports.map((r) => (
              <li key={r.hash}>
                <a className="underline" href={`/api/runs/${id.data}/reports/${r.hash}`}>PDF, {r.pages} pages</a>{" "}
                <span className="muted">
                  {formatUtc(new Date(r.at))} by {r.by}, {(r.bytes / 1024).toFixed(0)} KiB, made in {(r.generationMs / 1000).toFixed(1)} s, fingerprint {r.fingerprint.slice(0, 12)}…
                </span>
              </li>
            ))}
          </ul>
          {lead && data.approved ? <MakeReportForm runId={id.data} positions={q.positions ?? ""} shots={q.shots ?? ""} /> : null}
          {!data.approved ? <p className="muted">A lead approves the run before the interpretation is written and the report made.</p> : null}
        </div>
        {lead && data.approved ? <InterpretationForm runId={id.data} sections={data.interpretation} /> : null}
      </section>

      {!c ? (
        <p className="card p-4 text-sm" role="status">{data.problem}</p>
      ) : (
        <article className="card mx-auto max-w-[820px] space-y-8 p-8 print:border-0 print:p-0 print:shadow-none" data-testid="client-report">
          <header className="space-y-2">
            <p className="text-xs font-semibold uppercase tracking-widest muted">{c.firm}</p>
            <p className="muted">Seismic survey report: shear-wave velocity model</p>
            <h1 className="text-3xl font-semibold">{c.survey.name}</h1>
            <p className="text-lg">Profile {c.profile.name}</p>
            {c.survey.description ? <p>{c.survey.description}</p> : null}
            <Rows
              rows={[
                ["Client", c.survey.client || "(not recorded)"],
                ["Site", c.survey.site || "(not recorded)"],
                ["Processed by", `${c.processedBy} (run ${c.run.id})`],
                ["Approved by", `${c.approvedBy.name}, ${formatUtc(c.approvedBy.at)}`],
                ["Units", "metres (m), metres per second (m/s), milliseconds (ms)"],
                ["Coordinate reference", c.profile.coordinateReference],
              ]}
            />
          </header>

          <section className="space-y-2">
            <h2 className="text-xl font-semibold">1 Acquisition</h2>
            <Rows
              rows={[
                ["Dataset", `${c.acquisition.dataset.name}: ${c.acquisition.dataset.fileCount} files`],
                ["Dataset fingerprint", c.acquisition.dataset.hash],
                ["Records", `${c.acquisition.records} records of up to ${c.acquisition.channelsPerRecord} channels`],
                ["Spread", `receivers from ${m(c.acquisition.receiverFirstM)} to ${m(c.acquisition.receiverLastM)}${c.acquisition.receiverSpacingM !== null ? `, ${m(c.acquisition.receiverSpacingM)} apart` : ""}`],
                ["Source", `${c.acquisition.sourcePositionsM.length} source positions from ${m(c.acquisition.sourcePositionsM[0] ?? 0)} to ${m(c.acquisition.sourcePositionsM.at(-1) ?? 0)}; component ${c.acquisition.component}`],
                ["Sampling", `${c.acquisition.sampleIntervalMs} ms interval, ${c.acquisition.samples} samples, ${+c.acquisition.recordLengthMs.toFixed(1)} ms records`],
              ]}
            />
          </section>

          <section className="space-y-3">
            <h2 className="text-xl font-semibold">2 Processing</h2>
            <p className="text-sm">Pipeline {c.run.pipelineName}, version {c.run.pipelineVersion}, run {c.run.id}.</p>
            {c.steps.map((s) => (
              <div key={s.position} className="space-y-1" style={{ breakInside: "avoid" }}>
                <h3 className="font-medium">{s.position + 1}. {s.title} <span className="text-xs muted">step {s.stepId}{s.cacheHit ? ", reused" : ""}</span></h3>
                <Rows rows={s.settings.map((x) => [x.words, x.value])} />
              </div>
            ))}
          </section>

          <section className="space-y-3">
            <h2 className="text-xl font-semibold">3 Data examples</h2>
            <FigureSvg label="Shot gather before processing" figure={gatherFigure(c.gathers.before, { width: W, height: 300, title: `Before processing: ${c.gathers.before.id}` })} />
            <FigureSvg label="Shot gather after processing" figure={gatherFigure(c.gathers.after, { width: W, height: 300, title: `After processing: ${c.gathers.after.id}` })} />
          </section>

          <ModelSection c={c} />

          <section className="space-y-3">
            <h2 className="text-xl font-semibold">5 Data fit</h2>
            <FigureSvg label="Misfit by iteration and stage" figure={misfitFigure(c.misfit, { width: W, height: 190 })} />
            {c.fit.shots.map((s) => (
              <FigureSvg key={s.id} label={`Observed against synthetic, shot ${s.id}`} figure={gatherFigure(s.observed, { width: W, height: 270, title: `Shot ${s.id}, source at ${m(s.sourceX)}`, overlay: s.synthetic, legend: ["observed", "synthetic"] })} />
            ))}
          </section>

          <section className="space-y-3">
            <h2 className="text-xl font-semibold">6 Interpretation</h2>
            {c.interpretation.length === 0 ? <p className="muted">No interpretation was written for this run.</p> : null}
            {c.interpretation.map((t) => (
              <div key={t.section}>
                <h3 className="font-medium">{t.heading}</h3>
                <p className="whitespace-pre-line">{t.text}</p>
                <p className="text-xs muted">{t.author}, {formatUtc(t.at)}, version {t.version}</p>
              </div>
            ))}
          </section>

          <section className="space-y-2 rounded-md border border-warn/40 bg-warn-soft p-4" data-testid="report-cautions">
            <h2 className="text-xl font-semibold">7 Limitations and cautions</h2>
            <p className="font-medium text-warn">{c.cautions.heading}</p>
            <ul className="list-disc space-y-1 pl-5">
              {c.cautions.items.map((x) => <li key={x}>{x}</li>)}
              <li>The model is two-dimensional: it assumes the ground does not change across the profile {c.profile.name}.</li>
            </ul>
          </section>

          <section className="space-y-2">
            <h2 className="text-xl font-semibold">Appendix: provenance</h2>
            <Rows
              rows={[
                ["Run", `${c.run.id}, ${c.run.status}`],
                ["Pipeline", `${c.run.pipelineName} version ${c.run.pipelineVersion}`],
                ["Software", c.provenance.software],
                ...c.provenance.artifacts.map((a): [string, string] => [`${a.step} / ${a.slot}`, a.hash]),
              ]}
            />
          </section>
        </article>
      )}
    </div>
  );
}

function ModelSection({ c }: { c: NonNullable<ReturnType<typeof readReportPage>["content"]> }) {
  const { starting, final } = c.models;
  const sr = valueRange(starting.vs);
  const fr = valueRange(final.vs);
  const lo = Math.min(sr.min, fr.min);
  const hi = Math.max(sr.max, fr.max);
  return (
    <section className="space-y-3">
      <h2 className="text-xl font-semibold">4 Starting and final model</h2>
      <Rows
        rows={[
          ["Starting model", vsRangeWords(starting)],
          ["Inverted model", vsRangeWords(final)],
        ]}
      />
      <FigureSvg label="Starting model" figure={modelFigure(starting, { width: W, maxHeight: 230, title: "Starting model", lo, hi, positionsM: c.profilePositionsM })} />
      <FigureSvg label="Inverted model" figure={modelFigure(final, { width: W, maxHeight: 230, title: "Inverted model", lo, hi, positionsM: c.profilePositionsM })} />
      <FigureSvg label="Depth profiles" figure={depthProfilesFigure(starting, final, { width: W, height: 230, positionsM: c.profilePositionsM, lo, hi })} />
    </section>
  );
}
