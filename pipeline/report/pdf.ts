/**
 * Writes the client report as a PDF with pdfkit: A4, the fonts that ship with the app (IBM Plex
 * Sans and Mono, SIL Open Font License, in pipeline/report/fonts), the panels drawn as vector
 * graphics and the model sections as server-rendered PNG images. Nothing depends on fonts of the
 * system or on a browser.
 */
import path from "node:path";
import PDFDocument from "pdfkit";
import { projectRoot } from "../../db/paths";
import type { ReportContent } from "./content";
import { depthProfilesFigure, gatherFigure, misfitFigure, modelFigure, valueRange, type Figure, type Shape } from "./figures";
import { fontSafe, formatUtc, m, mps, vsRangeWords } from "./words";

const FONT_DIR = path.join(projectRoot, "pipeline", "report", "fonts");
const FONTS = {
  sans: path.join(FONT_DIR, "ibm-plex-sans-latin-400-normal.woff"),
  bold: path.join(FONT_DIR, "ibm-plex-sans-latin-600-normal.woff"),
  mono: path.join(FONT_DIR, "ibm-plex-mono-latin-400-normal.woff"),
};

const INK = "#1f2933";
const SOFT = "#52606d";
const WARN = "#8a4b08";
const MARGIN = 56;

/** How the report was made: printed on the title page and, with the fingerprint, on the last page. */
export interface ReportMaking {
  at: Date;
  by: string;
  fingerprint: string;
}

type Doc = InstanceType<typeof PDFDocument>;

function drawShape(doc: Doc, s: Shape): void {
  doc.save();
  switch (s.t) {
    case "line":
      doc.moveTo(s.x1, s.y1).lineTo(s.x2, s.y2).lineWidth(s.width ?? 0.6).strokeColor(s.stroke);
      if (s.dash) doc.dash(s.dash[0], { space: s.dash[1] ?? s.dash[0] });
      doc.stroke();
      break;
    case "path": {
      if (s.points.length < 2 && !s.close) break;
      doc.moveTo(s.points[0][0], s.points[0][1]);
      for (let i = 1; i < s.points.length; i++) doc.lineTo(s.points[i][0], s.points[i][1]);
      if (s.close) doc.closePath();
      doc.lineWidth(s.width ?? 0.6);
      if (s.dash) doc.dash(s.dash[0], { space: s.dash[1] ?? s.dash[0] });
      if (s.fill && s.stroke) doc.fillColor(s.fill).strokeColor(s.stroke).fillAndStroke();
      else if (s.fill) doc.fillColor(s.fill).fill();
      else doc.strokeColor(s.stroke ?? INK).stroke();
      break;
    }
    case "rect":
      doc.rect(s.x, s.y, s.w, s.h);
      if (s.fill && s.stroke) doc.lineWidth(s.width ?? 0.6).fillColor(s.fill).strokeColor(s.stroke).fillAndStroke();
      else if (s.fill) doc.fillColor(s.fill).fill();
      else doc.lineWidth(s.width ?? 0.6).strokeColor(s.stroke ?? INK).stroke();
      break;
    case "text": {
      doc.font(s.bold ? "bold" : "sans").fontSize(s.size).fillColor(s.color ?? INK);
      const w = doc.widthOfString(s.text);
      const x = s.anchor === "end" ? -w : s.anchor === "middle" ? -w / 2 : 0;
      doc.translate(s.x, s.y);
      if (s.rotate) doc.rotate(s.rotate);
      doc.text(s.text, x, 0, { lineBreak: false, baseline: "alphabetic" });
      break;
    }
    case "image":
      doc.image(Buffer.from(s.png), s.x, s.y, { width: s.w, height: s.h });
      break;
  }
  doc.restore();
}

/**
 * Renders the report of `c` to PDF bytes. Pages are A4 portrait; every page carries the survey,
 * the run and its number; the last page carries the fingerprint.
 */
export async function renderReportPdf(c: ReportContent, made: ReportMaking): Promise<{ bytes: Uint8Array; pages: number }> {
  const doc = new PDFDocument({
    size: "A4",
    margins: { top: MARGIN, bottom: MARGIN + 10, left: MARGIN, right: MARGIN },
    bufferPages: true,
    autoFirstPage: true,
    info: {
      Title: `${c.survey.name}, profile ${c.profile.name}: survey report`,
      Author: c.firm,
      Subject: `Run ${c.run.id}, ${c.run.pipelineName} version ${c.run.pipelineVersion}`,
      Creator: c.provenance.software,
      CreationDate: made.at,
      ModDate: made.at,
    },
  });
  // Every string passes through fontSafe on its way in (settings' descriptions and the lead's
  // text may hold symbols the shipped fonts lack), measured as drawn.
  const rawText = doc.text.bind(doc);
  const rawWidth = doc.widthOfString.bind(doc);
  const rawHeight = doc.heightOfString.bind(doc);
  doc.text = ((t: string, ...rest: unknown[]) => (rawText as (...a: unknown[]) => Doc)(typeof t === "string" ? fontSafe(t) : t, ...rest)) as typeof doc.text;
  doc.widthOfString = ((t: string, o?: PDFKit.Mixins.TextOptions) => rawWidth(fontSafe(t), o)) as typeof doc.widthOfString;
  doc.heightOfString = ((t: string, o?: PDFKit.Mixins.TextOptions) => rawHeight(fontSafe(t), o)) as typeof doc.heightOfString;
  doc.registerFont("sans", FONTS.sans);
  doc.registerFont("bold", FONTS.bold);
  doc.registerFont("mono", FONTS.mono);
  const chunks: Buffer[] = [];
  doc.on("data", (b: Buffer) => chunks.push(b));
  const ended = new Promise<void>((resolve, reject) => {
    doc.on("end", () => resolve());
    doc.on("error", reject);
  });

  const width = doc.page.width - 2 * MARGIN;
  const bottom = () => doc.page.height - doc.page.margins.bottom;
  const ensure = (h: number) => {
    if (doc.y + h > bottom()) doc.addPage();
  };
  const h1 = (t: string) => {
    doc.addPage();
    doc.font("bold").fontSize(17).fillColor(INK).text(t, MARGIN, doc.page.margins.top, { width });
    doc.moveDown(0.5);
  };
  /** A sub-heading kept with at least `keep` points of what follows it. */
  const h2 = (t: string, keep = 60) => {
    ensure(keep + 20);
    doc.moveDown(0.4);
    doc.font("bold").fontSize(11.5).fillColor(INK).text(t, MARGIN, doc.y, { width });
    doc.moveDown(0.25);
  };
  const para = (t: string, o: { size?: number; color?: string; font?: string } = {}) => {
    doc.font(o.font ?? "sans").fontSize(o.size ?? 9.5).fillColor(o.color ?? INK).text(t, MARGIN, doc.y, { width, lineGap: 1.5 });
    doc.moveDown(0.35);
  };
  const rows = (pairs: Array<[string, string]>, o: { keyWidth?: number; size?: number } = {}) => {
    const kw = o.keyWidth ?? 140;
    const size = o.size ?? 9.5;
    for (const [k, v] of pairs) {
      // Fingerprints (64 hex digits) in the monospaced face, small enough for one line.
      const isHash = /^[0-9a-f]{64}$/.test(v);
      doc.font("sans").fontSize(size);
      const kh = doc.heightOfString(k, { width: kw - 8 });
      if (isHash) doc.font("mono").fontSize(Math.min(size, 7.5));
      const h = Math.max(doc.heightOfString(v, { width: width - kw }), kh);
      ensure(h + 2);
      const y = doc.y;
      doc.font("sans").fontSize(size).fillColor(SOFT).text(k, MARGIN, y, { width: kw - 8 });
      if (isHash) doc.font("mono").fontSize(Math.min(size, 7.5));
      doc.fillColor(INK).text(v, MARGIN + kw, y, { width: width - kw });
      doc.y = y + h + 3;
    }
    doc.x = MARGIN;
  };
  const figure = (f: Figure, caption?: string) => {
    ensure(f.height + (caption ? 26 : 6));
    const top = doc.y;
    doc.save();
    doc.translate(MARGIN, top);
    for (const s of f.shapes) drawShape(doc, s);
    doc.restore();
    doc.x = MARGIN;
    doc.y = top + f.height + 4;
    if (caption) para(caption, { size: 8, color: SOFT });
  };
  const bullets = (items: readonly string[], o: { color?: string } = {}) => {
    for (const it of items) {
      doc.font("sans").fontSize(9.5);
      const h = doc.heightOfString(it, { width: width - 14 });
      ensure(h + 3);
      const y = doc.y;
      doc.fillColor(o.color ?? INK).text("•", MARGIN + 2, y);
      doc.text(it, MARGIN + 14, y, { width: width - 14, lineGap: 1.5 });
      doc.y = y + h + 4;
    }
    doc.x = MARGIN;
  };

  // ---- Title page -------------------------------------------------------------------------
  doc.font("bold").fontSize(10).fillColor(SOFT).text(c.firm.toUpperCase(), MARGIN, MARGIN + 10, { width, characterSpacing: 1 });
  doc.moveDown(5);
  doc.font("sans").fontSize(12).fillColor(SOFT).text("Seismic survey report: shear-wave velocity model", { width });
  doc.moveDown(0.3);
  doc.font("bold").fontSize(26).fillColor(INK).text(c.survey.name, { width });
  doc.moveDown(0.2);
  doc.font("sans").fontSize(15).fillColor(INK).text(`Profile ${c.profile.name}`, { width });
  if (c.survey.description) {
    doc.moveDown(0.8);
    para(c.survey.description, { size: 10.5 });
  }
  doc.moveDown(2.5);
  rows(
    [
      ["Client", c.survey.client || "(not recorded)"],
      ["Site", c.survey.site || "(not recorded)"],
      ["Survey", c.survey.name + (c.survey.slug ? ` (${c.survey.slug})` : "")],
      ["Profile", c.profile.name + (c.profile.description ? `: ${c.profile.description}` : "")],
      ["Date of the report", formatUtc(made.at)],
      ["Firm", c.firm],
      ["Processed by", `${c.processedBy} (run ${c.run.id}, finished ${c.run.finishedAt ? formatUtc(c.run.finishedAt) : "not finished"})`],
      ["Approved by", `${c.approvedBy.name}, ${formatUtc(c.approvedBy.at)}`],
      ["Report made by", made.by],
      ["Units", "metres (m), metres per second (m/s), milliseconds (ms)"],
      ["Coordinate reference", c.profile.coordinateReference],
    ],
    { keyWidth: 130, size: 10 },
  );
  doc.moveDown(1.5);
  para("Read the cautions in section 7 before using the model.", { size: 9.5, color: WARN });

  // ---- 1 Acquisition ----------------------------------------------------------------------
  const a = c.acquisition;
  h1("1  Acquisition");
  para("As read from the field records of the dataset the run processed (headers and the survey's geometry table).");
  const sources = a.sourcePositionsM;
  rows([
    ["Dataset", `${a.dataset.name}: ${a.dataset.fileCount} files, ${(a.dataset.totalBytes / 1e6).toFixed(2)} MB`],
    ["Dataset fingerprint", a.dataset.hash],
    ["Records", `${a.records} records of up to ${a.channelsPerRecord} channels`],
    [
      "Spread",
      `receivers from ${m(a.receiverFirstM)} to ${m(a.receiverLastM)} along the profile` +
        (a.receiverSpacingM !== null ? `, ${m(a.receiverSpacingM)} apart` : "") +
        ` (${m(a.receiverLastM - a.receiverFirstM)} long)`,
    ],
    [
      "Source",
      `${sources.length} source positions from ${m(sources[0] ?? 0)} to ${m(sources[sources.length - 1] ?? 0)}` +
        (a.blowsPerSourcePoint > 1 ? `, up to ${a.blowsPerSourcePoint} blows each (stacked in processing)` : "") +
        `; recorded component ${a.component === "z" ? "vertical (z)" : a.component === "y" ? "horizontal crossline (y)" : "horizontal inline (x)"}`,
    ],
    ["Sampling", `${+a.sampleIntervalMs.toFixed(4)} ms interval, ${a.samples} samples, ${+a.recordLengthMs.toFixed(1)} ms records starting at ${+a.startTimeMs.toFixed(1)} ms`],
    ["Coordinate reference", c.profile.coordinateReference],
  ]);

  // ---- 2 Processing -----------------------------------------------------------------------
  h2("2  Processing");
  para(
    `Pipeline ${c.run.pipelineName}, version ${c.run.pipelineVersion}, run ${c.run.id}. Each step in order with every setting it used; ` +
      `steps marked "reused" took their result from an identical earlier computation (same inputs and settings).`,
  );
  for (const s of c.steps) {
    doc.font("bold").fontSize(9.5);
    ensure(34);
    doc.fillColor(INK).text(`${s.position + 1}. ${s.title}`, MARGIN, doc.y, { width, continued: false });
    doc.font("sans").fontSize(8).fillColor(SOFT).text(`step ${s.stepId}${s.label !== s.stepId ? `, labelled ${s.label}` : ""}${s.cacheHit ? ", reused" : ""}`, { width });
    doc.moveDown(0.15);
    rows(
      s.settings.map((x) => [x.words, x.value]),
      { keyWidth: 250, size: 8 },
    );
    doc.moveDown(0.3);
  }

  // ---- 3 Data examples --------------------------------------------------------------------
  h1("3  Data examples");
  const before = c.gathers.before;
  const after = c.gathers.after;
  para(
    `One shot gather, source at ${m(before.traces[0]?.sourceX ?? 0)}, as recorded (step ${c.gathers.beforeStep}) and after processing, as the inversion read it ` +
      `(step ${c.gathers.afterStep}). Each trace is scaled to its own peak for display.`,
  );
  figure(gatherFigure(before, { width, height: 300, title: `Before processing: ${before.id}` }));
  figure(gatherFigure(after, { width, height: 300, title: `After processing: ${after.id}` }));

  // ---- 4 Models ---------------------------------------------------------------------------
  const { starting, final } = c.models;
  const sr = valueRange(starting.vs);
  const fr = valueRange(final.vs);
  const lo = Math.min(sr.min, fr.min);
  const hi = Math.max(sr.max, fr.max);
  h1("4  Starting and final model");
  para(
    `Shear-wave velocity Vs on a grid of ${final.nx} by ${final.nz} cells of ${m(final.spacingM)}, from ${m(final.originX)} to ` +
      `${m(final.originX + (final.nx - 1) * final.spacingM)} along the profile and from ${m(final.originZ)} to ${m(final.originZ + (final.nz - 1) * final.spacingM)} depth. ` +
      `Both sections share one colour scale, ${mps(lo)} to ${mps(hi)}; dashed lines mark the depth profiles below.`,
  );
  rows([
    ["Starting model", `${vsRangeWords(starting)} (step ${c.models.startingStep})`],
    ["Inverted model", `${vsRangeWords(final)} (step ${c.models.finalStep})`],
  ]);
  doc.moveDown(0.3);
  figure(modelFigure(starting, { width, maxHeight: 230, title: "Starting model", lo, hi, positionsM: c.profilePositionsM }));
  figure(modelFigure(final, { width, maxHeight: 230, title: "Inverted model", lo, hi, positionsM: c.profilePositionsM }), c.cautions.items[0]);
  h2("Depth profiles", 240);
  figure(depthProfilesFigure(starting, final, { width, height: 230, positionsM: c.profilePositionsM, lo, hi }), `Vs with depth at the positions chosen: ${c.profilePositionsM.map((x) => m(x)).join(", ")}.`);

  // ---- 5 Data fit -------------------------------------------------------------------------
  h1("5  Data fit");
  para(
    `The inversion for ${c.inversion.invertFor === "vs" ? "Vs" : c.inversion.invertFor} used ${c.inversion.shots} shots` +
      (c.inversion.iterations !== null ? ` over ${c.inversion.iterations} iterations` : "") +
      (c.inversion.forwardSolves !== null ? ` (${c.inversion.forwardSolves} wave simulations)` : "") +
      `, in ${c.misfit.length} frequency stage${c.misfit.length === 1 ? "" : "s"}. The misfit jumps up where a stage starts because higher frequencies enter the comparison; it then falls again.`,
  );
  figure(misfitFigure(c.misfit, { width, height: 190 }));
  rows(
    c.misfit.map((s) => [
      `Stage ${s.stage}${s.lowPassHz !== null ? ` (to ${s.lowPassHz} Hz)` : ""}`,
      [
        s.measure ? `measure ${s.measure}` : null,
        s.iterations !== null ? `${s.iterations} iterations` : null,
        s.startMisfit !== null && s.endMisfit !== null
          ? `misfit ${s.startMisfit.toPrecision(4)} to ${s.endMisfit.toPrecision(4)} (${(100 * (1 - s.endMisfit / s.startMisfit)).toFixed(1)} % lower)`
          : null,
        s.stoppedBy ? `stopped by ${s.stoppedBy}` : null,
        s.startModelMisfit != null && s.finalModelMisfit != null && s.startModelMisfit > 0
          ? `under this stage's measure the final model scores ${s.finalModelMisfit.toPrecision(4)} against ${s.startModelMisfit.toPrecision(4)} for the starting model (${((100 * s.finalModelMisfit) / s.startModelMisfit).toFixed(0)} %)`
          : null,
      ]
        .filter(Boolean)
        .join(", "),
    ]),
    { size: 8.5 },
  );
  h2("Observed against synthetic", 120);
  para(`At the ${c.fit.stageLabel}: the observed data in that stage's band (black) and the synthetic data of the model (red), each trace scaled to its own peak.`, { size: 9 });
  for (const s of c.fit.shots) {
    figure(gatherFigure(s.observed, { width, height: 270, title: `Shot ${s.id}, source at ${m(s.sourceX)}`, overlay: s.synthetic, legend: ["observed", "synthetic"] }));
  }

  // ---- 6 Interpretation -------------------------------------------------------------------
  h1("6  Interpretation");
  if (c.interpretation.length === 0) para("No interpretation was written for this run.", { color: SOFT });
  for (const t of c.interpretation) {
    h2(t.heading);
    para(t.text, { size: 10 });
    para(`${t.author}, ${formatUtc(t.at)}, version ${t.version}`, { size: 7.5, color: SOFT });
  }

  // ---- 7 Limitations and cautions ---------------------------------------------------------
  h2("7  Limitations and cautions");
  ensure(120);
  para(c.cautions.heading, { size: 10.5, color: WARN, font: "bold" });
  bullets(c.cautions.items);
  bullets([
    `The model is two-dimensional: it assumes the ground does not change across the profile ${c.profile.name}.`,
    `Positions are along the profile as surveyed (the local line coordinate stated on the title page); depths are below the ground surface at each point, not to a level datum.`,
  ]);

  // ---- Appendix: provenance ---------------------------------------------------------------
  h1("Appendix: provenance");
  para("Everything this report was made from, so the result can be found, checked and made again.");
  rows([
    ["Run", `${c.run.id}, ${c.run.status}, created ${formatUtc(c.run.createdAt)}`],
    ["Pipeline", `${c.run.pipelineName} version ${c.run.pipelineVersion}`],
    ["Pipeline fingerprint", c.run.pipelineHash ?? "(not recorded)"],
    ["Dataset fingerprint", a.dataset.hash],
    ["Geometry table", c.provenance.geometryTableHash ?? "(none)"],
    ["Software", c.provenance.software],
  ]);
  h2("Artifacts (SHA-256)");
  for (const x of c.provenance.artifacts) {
    doc.font("mono").fontSize(6.8);
    ensure(10);
    const y = doc.y;
    doc.fillColor(SOFT).font("sans").fontSize(7).text(`${x.step} / ${x.slot}`, MARGIN, y, { width: 150, lineBreak: false, ellipsis: true, height: 9 });
    doc.fillColor(INK).font("mono").fontSize(6.8).text(x.hash, MARGIN + 155, y, { width: width - 155, lineBreak: false });
    doc.y = y + 9.5;
  }
  doc.x = MARGIN;
  h2("Report fingerprint");
  para(
    `SHA-256 over the run, the pipeline version, the dataset, every artifact above, the interpretation texts and versions, the positions and shots chosen, ` +
      `who made the report and when (${made.by}, ${formatUtc(made.at)}), and the software version. The stored report is recorded under the audit event "report.create" with this fingerprint.`,
    { size: 8.5, color: SOFT },
  );
  para(made.fingerprint, { font: "mono", size: 9 });

  // Running footer on every page.
  const range = doc.bufferedPageRange();
  const pages = range.count;
  for (let i = range.start; i < range.start + range.count; i++) {
    doc.switchToPage(i);
    const y = doc.page.height - MARGIN + 8;
    const text = `${c.survey.name} · profile ${c.profile.name} · run ${c.run.id} · ${formatUtc(made.at)}`;
    doc.font("sans").fontSize(7).fillColor(SOFT);
    doc.text(text, MARGIN, y, { width, lineBreak: false, height: 10 });
    const pageText = `page ${i + 1} of ${pages}`;
    doc.text(pageText, MARGIN + width - doc.widthOfString(pageText), y, { lineBreak: false, height: 10 });
  }
  doc.end();
  await ended;
  const bytes = new Uint8Array(Buffer.concat(chunks));
  return { bytes, pages };
}
