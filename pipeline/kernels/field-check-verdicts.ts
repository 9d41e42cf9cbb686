/**
 * Field checks of a folder of raw shot records (one record per blow), from the per-trace measures
 * of field-checks.ts to a verdict per shot, per channel and per trace (ok / warn / reshoot) with
 * the reasons. Pure: plain data in, plain data out; the thresholds come as arguments.
 *
 * Trace measures: level against neighbouring traces (dead), noise before the earliest possible
 * arrival against the folder's median (noisy), polarity against neighbours, clipped samples,
 * mains-hum level. Shot measures: the median noise of the blow, the source position where the
 * first-arrival lines of both sides meet (a source logged at the wrong position), the
 * first-arrival time at the source against the other shots (trigger timing slip).
 */
import { clippedSamples, fitSourcePosition, lineLevels, median, neighbourLevelRatio, polarityScores, recordLag, windowRms, type SourceFit } from "./field-checks";

/** One raw record (one blow) as the checks see it. Positions in m, times in s. */
export interface FieldShot {
  id: string;
  file: string;
  sourcePoint: number;
  blow: number;
  /** Logged source position, m. */
  sourceX: number;
  sampleIntervalS: number;
  /** Time of the first sample relative to the trigger, s. */
  startTimeS: number;
  sampleCount: number;
  /** Channel number of each trace. */
  channel: ArrayLike<number>;
  /** Receiver position of each trace, m. */
  receiverX: ArrayLike<number>;
  /** Samples `[trace][sample]`. */
  data: Float32Array;
}

/** Thresholds and windows of the checks (units in the names). */
export interface FieldCheckThresholds {
  deadLevelRatio: number;
  levelNeighbours: number;
  deadChannelShare: number;
  fastestVelocityMps: number;
  noiseGuardMs: number;
  noiseMinWindowMs: number;
  noiseMinOffsetM: number;
  noisyTraceRatio: number;
  noisyBlowWarnRatio: number;
  noisyBlowReshootRatio: number;
  polarityNeighbours: number;
  correlationWindowEndMs: number;
  slowestVelocityMps: number;
  polaritySlackMs: number;
  reversedScore: number;
  reversedChannelShare: number;
  symmetryMinOffsetM: number;
  symmetryMaxOffsetM: number;
  minMirrorPairs: number;
  maxSourceShiftM: number;
  maxTriggerSlipMs: number;
  sameSourceCorrelation: number;
  blowCompareIntervalMs: number;
  minSymmetry: number;
  sourceWarnM: number;
  sourceReshootM: number;
  triggerWarnMs: number;
  triggerReshootMs: number;
  mainsHz: number[];
  mainsHarmonics: number;
  humWarnDb: number;
  humReshootDb: number | null;
  clipMinRun: number;
  clipWarnSamples: number;
  clipReshootSamples: number;
}

export type Verdict = "ok" | "warn" | "reshoot";
const RANK: Record<Verdict, number> = { ok: 0, warn: 1, reshoot: 2 };
/** The worse of two verdicts. */
export function worse(a: Verdict, b: Verdict): Verdict {
  return RANK[a] >= RANK[b] ? a : b;
}

/** Kinds of finding. */
export type FindingKind =
  | "dead-channel"
  | "dead-trace"
  | "noisy-blow"
  | "noisy-trace"
  | "noisy-channel"
  | "reversed-channel"
  | "reversed-trace"
  | "trigger-slip"
  | "source-position"
  | "mains-hum"
  | "clipped";

/** One thing the checks found, with what to do about it. */
export interface FieldFinding {
  kind: FindingKind;
  verdict: Exclude<Verdict, "ok">;
  /** Shot (record) it concerns, when it concerns one. */
  gatherId?: string;
  file?: string;
  /** Channel it concerns, when it concerns one. */
  channel?: number;
  /** The measured figure and its unit. */
  value: number;
  unit: string;
  /** One sentence for people: what, where, how much, and what to do. */
  message: string;
}

/** Per-shot measures and verdict. */
export interface ShotVerdict {
  gatherId: string;
  file: string;
  sourcePoint: number;
  blow: number;
  loggedSourceXM: number;
  verdict: Verdict;
  reasons: string[];
  /** Median over live traces of noise / folder median noise. */
  noiseRatio: number;
  /** Source position from the blows that agree with this one, or from the symmetry of the move-out, m, and its difference from the log (NaN: not judged). */
  fittedSourceXM: number;
  sourceErrorM: number;
  /** Lag of the record behind the other blows at the same source position (median), ms (NaN: not judged). */
  triggerSlipMs: number;
  /** Strongest mains line over its neighbouring band, median over live traces, dB. */
  humDb: number;
  /** Symmetry of the record about the fitted source and about the logged one (mean correlation of mirrored traces). */
  symmetry: number;
  symmetryAtLog: number;
  /** Other blows the trigger timing was compared with. */
  triggerPartners: number;
  /** Blows whose records agree with this one (shot at the same position). */
  blowsAlike: string[];
}

/** Per-channel summary over all shots. */
export interface ChannelVerdict {
  channel: number;
  verdict: Verdict;
  reasons: string[];
  deadShots: number;
  reversedShots: number;
  noisyShots: number;
}

/** What the field check writes. */
export interface FieldCheckResult {
  /** Channels in ascending order: the columns of the grid. */
  channels: number[];
  shots: ShotVerdict[];
  channelVerdicts: ChannelVerdict[];
  /** Verdict per shot and channel, row-major `[shot][channel]` as 0 ok, 1 warn, 2 reshoot (−1: no trace). */
  grid: number[];
  /** Per-trace measures in the layout of `grid` (NaN where there is no trace or no measure). */
  measures: {
    /** RMS level over the neighbours' median (ratio). */
    levelRatio: number[];
    /** Noise before the earliest arrival over the folder's median (ratio). */
    noiseRatio: number[];
    /** Median correlation with the neighbours at the best lag (−1 … 1). */
    polarity: number[];
    /** Strongest mains line over its neighbouring bins, dB. */
    humDb: number[];
    /** Clipped samples (count). */
    clippedSamples: number[];
  };
  /** Reasons of the cells that are not ok. */
  cells: Array<{ shot: number; channel: number; verdict: Exclude<Verdict, "ok">; reasons: string[] }>;
  findings: FieldFinding[];
  /** Folder medians the ratios refer to. */
  reference: { noiseRms: number };
  counts: { shots: number; traces: number; warn: number; reshoot: number; shotsReshoot: number; shotsWarn: number };
  verdict: Verdict;
}

interface TraceMeasures {
  level: Float64Array;
  noise: Float64Array;
  polarity: Float64Array;
  clipped: Int32Array;
  humDb: Float64Array;
  humHz: Float64Array;
  dead: Uint8Array;
  source: SourceFit;
  /** The correlation window averaged over blocks of samples, `[trace][block]`, for comparing blows. */
  coarse: Float32Array;
  coarseCount: number;
  coarseIntervalS: number;
}

function measureShot(s: FieldShot, th: FieldCheckThresholds): TraceMeasures {
  const nt = s.channel.length;
  const ns = s.sampleCount;
  const dt = s.sampleIntervalS;
  const order = Array.from({ length: nt }, (_, i) => i).sort((a, b) => s.receiverX[a] - s.receiverX[b]);
  const all0 = new Int32Array(nt);
  const allN = new Int32Array(nt).fill(ns);
  const rms = windowRms(s.data, nt, ns, all0, allN);
  const level = neighbourLevelRatio(rms, order, th.levelNeighbours);
  const dead = new Uint8Array(nt);
  for (let t = 0; t < nt; t++) dead[t] = level[t] < th.deadLevelRatio ? 1 : 0;
  const toIndex = (timeS: number) => Math.round((timeS - s.startTimeS) / dt);
  // Noise: from the first sample to just before the earliest possible arrival.
  const noiseEnd = new Int32Array(nt);
  for (let t = 0; t < nt; t++) {
    const x = Math.abs(s.receiverX[t] - s.sourceX);
    // The traces next to the source are left out: their pre-trigger window is short and the
    // source's own near field (the plate, the crew) reaches them first (common practice).
    noiseEnd[t] = x < th.noiseMinOffsetM ? 0 : Math.max(0, Math.min(ns, toIndex(x / th.fastestVelocityMps - th.noiseGuardMs / 1000)));
  }
  const noise = windowRms(s.data, nt, ns, all0, noiseEnd, Math.max(2, Math.round(th.noiseMinWindowMs / 1000 / dt)));
  for (let t = 0; t < nt; t++) if (dead[t]) noise[t] = NaN;
  // Correlation window: from the source instant to correlationWindowEndMs.
  const w0 = Math.max(0, Math.min(ns - 2, toIndex(0)));
  const w1 = Math.max(w0 + 2, Math.min(ns, toIndex(th.correlationWindowEndMs / 1000)));
  // A coarser copy of the correlation window (means of `stride` samples).
  const stride = Math.max(1, Math.floor(th.blowCompareIntervalMs / 1000 / dt + 1e-9));
  const coarseCount = Math.floor((w1 - w0) / stride);
  const coarse = new Float32Array(nt * coarseCount);
  for (let t = 0; t < nt; t++) {
    for (let c = 0; c < coarseCount; c++) {
      let sum = 0;
      for (let k = 0; k < stride; k++) sum += s.data[t * ns + w0 + c * stride + k];
      coarse[t * coarseCount + c] = sum / stride;
    }
  }
  // Trace against trace on the block means: the same answer for the frequencies of interest at a
  // fraction of the cost (the quick turn-around between blows is the point of a field check).
  const cdt = stride * dt;
  const polarity = polarityScores(coarse, nt, coarseCount, {
    order,
    receiverX: s.receiverX,
    skip: dead,
    neighbours: th.polarityNeighbours,
    windowStart: 0,
    windowEnd: coarseCount,
    lagSamplesPerM: 1 / th.slowestVelocityMps / cdt,
    lagSlackSamples: Math.round(th.polaritySlackMs / 1000 / cdt),
  });
  const clipped = new Int32Array(nt);
  const humDb = new Float64Array(nt).fill(NaN);
  const humHz = new Float64Array(nt).fill(NaN);
  const nyquist = 0.5 / dt;
  const lines: number[] = [];
  for (const mains of th.mainsHz) for (let h = 1; h <= th.mainsHarmonics && mains * h < nyquist * 0.9; h++) lines.push(mains * h);
  for (let t = 0; t < nt; t++) {
    if (dead[t]) continue;
    clipped[t] = clippedSamples(s.data, t * ns, ns, th.clipMinRun).clippedSamples;
    for (const l of lineLevels(s.data, t * ns, ns, dt, lines, 3, 8)) {
      if (!(l.levelDb <= humDb[t])) {
        humDb[t] = l.levelDb;
        humHz[t] = l.frequencyHz;
      }
    }
  }
  const source = fitSourcePosition(coarse, nt, coarseCount, s.receiverX, dead, s.sourceX, {
    minOffsetM: th.symmetryMinOffsetM,
    maxOffsetM: th.symmetryMaxOffsetM,
    minPairs: th.minMirrorPairs,
    maxShiftM: th.maxSourceShiftM,
    windowStart: 0,
    windowEnd: coarseCount,
  });
  return { level, noise, polarity, clipped, humDb, humHz, dead, source, coarse, coarseCount, coarseIntervalS: stride * dt };
}

const fmt = (v: number, digits = 1) => (Number.isFinite(v) ? v.toFixed(digits) : "n/a");

/**
 * Runs every check on the records of one folder and gives the verdicts. `onShot` is called after
 * each record is measured (progress, cancellation).
 */
export function checkFieldShots(shots: FieldShot[], th: FieldCheckThresholds, onShot?: (done: number, total: number) => void): FieldCheckResult {
  if (shots.length === 0) throw new RangeError("shots must hold at least one record");
  for (const s of shots) {
    if (s.channel.length !== s.receiverX.length || s.data.length !== s.channel.length * s.sampleCount) {
      throw new RangeError(`record "${s.id}": channel (${s.channel.length}), receiverX (${s.receiverX.length}) and data (${s.data.length}) do not match ${s.sampleCount} samples per trace`);
    }
  }
  const measures: TraceMeasures[] = [];
  shots.forEach((s, i) => {
    measures.push(measureShot(s, th));
    onShot?.(i + 1, shots.length);
  });
  const channels = [...new Set(shots.flatMap((s) => Array.from(s.channel)))].sort((a, b) => a - b);
  const col = new Map(channels.map((c, i) => [c, i]));
  const nc = channels.length;
  const grid = new Array<number>(shots.length * nc).fill(-1);
  const cellReasons = new Map<number, { verdict: Verdict; reasons: string[] }>();
  const mark = (si: number, ch: number, v: Exclude<Verdict, "ok">, reason: string) => {
    const k = si * nc + col.get(ch)!;
    const c = cellReasons.get(k) ?? { verdict: "ok" as Verdict, reasons: [] };
    c.verdict = worse(c.verdict, v);
    c.reasons.push(reason);
    cellReasons.set(k, c);
  };
  const findings: FieldFinding[] = [];

  // Folder references: median noise of live traces, median first-arrival time at the source.
  const allNoise: number[] = [];
  for (const m of measures) for (const v of m.noise) if (Number.isFinite(v) && v > 0) allNoise.push(v);
  const noiseRef = median(allNoise);

  // Per channel: in how many shots dead, reversed, noisy.
  const deadCount = new Int32Array(nc);
  const reversedCount = new Int32Array(nc);
  const noisyCount = new Int32Array(nc);
  const present = new Int32Array(nc);
  const shotNoise: number[] = [];
  const cellMeasures: FieldCheckResult["measures"] = {
    levelRatio: new Array<number>(grid.length).fill(NaN),
    noiseRatio: new Array<number>(grid.length).fill(NaN),
    polarity: new Array<number>(grid.length).fill(NaN),
    humDb: new Array<number>(grid.length).fill(NaN),
    clippedSamples: new Array<number>(grid.length).fill(NaN),
  };
  shots.forEach((s, si) => {
    const m = measures[si];
    const ratios: number[] = [];
    for (let t = 0; t < s.channel.length; t++) {
      const c = col.get(s.channel[t])!;
      grid[si * nc + c] = 0;
      present[c]++;
      const k = si * nc + c;
      cellMeasures.levelRatio[k] = m.level[t];
      cellMeasures.noiseRatio[k] = m.noise[t] / noiseRef;
      cellMeasures.polarity[k] = m.polarity[t];
      cellMeasures.humDb[k] = m.humDb[t];
      cellMeasures.clippedSamples[k] = m.clipped[t];
      if (m.level[t] < th.deadLevelRatio) deadCount[c]++;
      if (m.polarity[t] < th.reversedScore) reversedCount[c]++;
      const r = m.noise[t] / noiseRef;
      if (Number.isFinite(r)) ratios.push(r);
      if (r > th.noisyTraceRatio) noisyCount[c]++;
    }
    shotNoise.push(median(ratios));
  });

  // Channels: dead, reversed or noisy in most shots is a fault of the channel (geophone, take-out, cable).
  const channelVerdicts: ChannelVerdict[] = channels.map((ch, c) => {
    const reasons: string[] = [];
    let verdict: Verdict = "ok";
    const share = (n: number) => (present[c] > 0 ? n / present[c] : 0);
    if (share(deadCount[c]) >= th.deadChannelShare) {
      verdict = "reshoot";
      reasons.push(`dead in ${deadCount[c]} of ${present[c]} records`);
      findings.push({
        kind: "dead-channel",
        verdict: "reshoot",
        channel: ch,
        value: deadCount[c],
        unit: "records",
        message: `Channel ${ch} is dead in ${deadCount[c]} of ${present[c]} records: check its geophone, take-out and cable, then reshoot the records that need it.`,
      });
    }
    if (share(reversedCount[c]) >= th.reversedChannelShare) {
      verdict = worse(verdict, "warn");
      reasons.push(`reversed polarity in ${reversedCount[c]} of ${present[c]} records`);
      findings.push({
        kind: "reversed-channel",
        verdict: "warn",
        channel: ch,
        value: reversedCount[c],
        unit: "records",
        message: `Channel ${ch} has reversed polarity in ${reversedCount[c]} of ${present[c]} records: check the geophone's wiring (processing can flip it).`,
      });
    }
    if (share(noisyCount[c]) >= th.deadChannelShare) {
      verdict = worse(verdict, "warn");
      reasons.push(`noisy in ${noisyCount[c]} of ${present[c]} records`);
      findings.push({
        kind: "noisy-channel",
        verdict: "warn",
        channel: ch,
        value: noisyCount[c],
        unit: "records",
        message: `Channel ${ch} is noisy in ${noisyCount[c]} of ${present[c]} records: check the geophone's coupling and the cable.`,
      });
    }
    return { channel: ch, verdict, reasons, deadShots: deadCount[c], reversedShots: reversedCount[c], noisyShots: noisyCount[c] };
  });
  const channelFault = new Map(channelVerdicts.map((v) => [v.channel, v]));

  // Blows against blows: records from one source position agree closely (same ground, same
  // spread), so blows logged near each other are cross-correlated; pairs that agree at least
  // sameSourceCorrelation are taken as shot at one position. The lag of the best agreement is
  // the trigger slip between them.
  const noisyShot = shotNoise.map((r) => r >= th.noisyBlowWarnRatio);
  const n = shots.length;
  const parent = Array.from({ length: n }, (_, i) => i);
  const root = (i: number): number => (parent[i] === i ? i : (parent[i] = root(parent[i])));
  const lags: number[][] = shots.map(() => []);
  const partners: number[][] = shots.map(() => []);
  const bestMatch = new Float64Array(n).fill(NaN);
  for (let i = 0; i < n; i++) {
    if (noisyShot[i]) continue;
    for (let j = i + 1; j < n; j++) {
      if (noisyShot[j] || Math.abs(shots[i].sourceX - shots[j].sourceX) > th.maxSourceShiftM) continue;
      const a = shots[i];
      const b = shots[j];
      const ma = measures[i];
      const mb = measures[j];
      if (ma.coarseCount !== mb.coarseCount || ma.coarseIntervalS !== mb.coarseIntervalS || a.startTimeS !== b.startTimeS || a.channel.length !== b.channel.length) continue;
      let same = true;
      for (let t = 0; t < a.channel.length && same; t++) same = a.channel[t] === b.channel[t];
      if (!same) continue;
      const skip = new Uint8Array(a.channel.length);
      for (let t = 0; t < skip.length; t++) skip[t] = ma.dead[t] || mb.dead[t] ? 1 : 0;
      const maxLag = Math.max(1, Math.min(ma.coarseCount - 1, Math.round(th.maxTriggerSlipMs / 1000 / ma.coarseIntervalS)));
      const r = recordLag(ma.coarse, mb.coarse, a.channel.length, ma.coarseCount, skip, ma.coarseIntervalS, 0, ma.coarseCount, maxLag);
      if (!(r.correlation >= th.sameSourceCorrelation)) continue;
      // Blows logged at different positions count as shot at one position only when they agree
      // without a shift: a source moved along the line beyond the end of the spread delays every
      // arrival alike, which would pass for a trigger slip.
      if (a.sourceX !== b.sourceX && !(Math.abs(r.lagS) * 1000 < th.triggerWarnMs)) continue;
      if (!(r.correlation <= bestMatch[i])) bestMatch[i] = r.correlation;
      if (!(r.correlation <= bestMatch[j])) bestMatch[j] = r.correlation;
      parent[root(i)] = root(j);
      // b later than a by lag: b's slip is +lag against a, a's is −lag against b.
      lags[j].push(r.lagS);
      lags[i].push(-r.lagS);
      partners[i].push(j);
      partners[j].push(i);
    }
  }
  const slips = lags.map((l) => (l.length > 0 ? median(l) : NaN));
  // Each group of blows shot at one position: the position most of them were logged at; on a tie,
  // the logged position nearest to where the group's records are most symmetric.
  const groupPosition = new Float64Array(n).fill(NaN);
  const groups = new Map<number, number[]>();
  for (let i = 0; i < n; i++) if (partners[i].length > 0) groups.set(root(i), [...(groups.get(root(i)) ?? []), i]);
  for (const members of groups.values()) {
    const votes = new Map<number, number>();
    for (const i of members) votes.set(shots[i].sourceX, (votes.get(shots[i].sourceX) ?? 0) + 1);
    const top = Math.max(...votes.values());
    const leaders = [...votes.entries()].filter(([, v]) => v === top).map(([x]) => x);
    let chosen = leaders[0];
    if (leaders.length > 1) {
      const sym = median(members.map((i) => measures[i].source.sourceXM));
      chosen = Number.isFinite(sym) ? leaders.reduce((p, q) => (Math.abs(q - sym) < Math.abs(p - sym) ? q : p)) : NaN;
    }
    for (const i of members) groupPosition[i] = chosen;
  }

  const shotVerdicts: ShotVerdict[] = shots.map((s, si) => {
    const m = measures[si];
    const reasons: string[] = [];
    let verdict: Verdict = "ok";
    const where = `${s.id} (${s.file})`;
    const add = (f: Omit<FieldFinding, "gatherId" | "file">) => {
      findings.push({ ...f, gatherId: s.id, file: s.file });
      verdict = worse(verdict, f.verdict);
    };
    // A noisy blow: the whole record's noise level, not one trace.
    const nr = shotNoise[si];
    if (nr >= th.noisyBlowWarnRatio) {
      const v: Exclude<Verdict, "ok"> = nr >= th.noisyBlowReshootRatio ? "reshoot" : "warn";
      reasons.push(`noise ${fmt(nr)} × the folder's median before the first arrivals`);
      add({ kind: "noisy-blow", verdict: v, value: nr, unit: "× median noise", message: `${where}: noise before the first arrivals is ${fmt(nr)} × the folder's median: ${v === "reshoot" ? "repeat the blow" : "consider repeating the blow"} at source point ${s.sourcePoint}.` });
    }
    const fit = m.source;
    const judged = !noisyShot[si];
    const slipMs = judged ? slips[si] * 1000 : NaN;
    // Position: the group of blows that agree with this one, else the record's own symmetry where
    // it is symmetric enough to judge (strong lateral changes make records asymmetric by themselves).
    const fromGroup = Number.isFinite(groupPosition[si]) && groupPosition[si] !== s.sourceX;
    const fromSymmetry = fit.symmetry >= th.minSymmetry;
    const estimateX = !judged ? NaN : fromGroup ? groupPosition[si] : fromSymmetry ? fit.sourceXM : Number.isFinite(groupPosition[si]) ? groupPosition[si] : NaN;
    const errorM = estimateX - s.sourceX;
    const how = fromGroup
      ? `its record matches the blows logged at x = ${fmt(estimateX, 1)} m`
      : `its move-out is symmetric about x = ${fmt(estimateX, 1)} m`;
    if (Number.isFinite(errorM) && Math.abs(errorM) >= th.sourceWarnM) {
      const v: Exclude<Verdict, "ok"> = Math.abs(errorM) >= th.sourceReshootM ? "reshoot" : "warn";
      reasons.push(`source at x = ${fmt(estimateX, 1)} m, logged ${fmt(s.sourceX, 1)} m: ${how}`);
      add({
        kind: "source-position",
        verdict: v,
        value: errorM,
        unit: "m",
        message: `${where}: the source was probably at x = ${fmt(estimateX, 1)} m, ${fmt(Math.abs(errorM), 1)} m ${errorM < 0 ? "before" : "beyond"} the logged ${fmt(s.sourceX, 1)} m (source point ${s.sourcePoint}): ${how}. Check the field log and the source peg${v === "reshoot" ? ", or reshoot at the logged point" : ""}.`,
      });
    }
    if (Number.isFinite(slipMs) && Math.abs(slipMs) >= th.triggerWarnMs) {
      const v: Exclude<Verdict, "ok"> = Math.abs(slipMs) >= th.triggerReshootMs ? "reshoot" : "warn";
      reasons.push(`record ${fmt(slipMs)} ms ${slipMs > 0 ? "late" : "early"} against the other blows at this position`);
      add({
        kind: "trigger-slip",
        verdict: v,
        value: slipMs,
        unit: "ms",
        message: `${where}: the record comes ${fmt(Math.abs(slipMs))} ms ${slipMs > 0 ? "later" : "earlier"} than the other blows at this position: check the trigger (switch on the hammer, cable)${v === "reshoot" ? " and repeat the blow" : ""}.`,
      });
    }
    // Trace checks; faults of the whole channel or the whole blow are reported once, above.
    for (let t = 0; t < s.channel.length; t++) {
      const ch = s.channel[t];
      const chv = channelFault.get(ch)!;
      if (m.level[t] < th.deadLevelRatio) {
        mark(si, ch, chv.deadShots / Math.max(1, present[col.get(ch)!]) >= th.deadChannelShare ? "reshoot" : "warn", `dead (level ${fmt(m.level[t], 3)} × neighbours)`);
        if (!(chv.deadShots / present[col.get(ch)!] >= th.deadChannelShare)) {
          add({ kind: "dead-trace", verdict: "warn", channel: ch, value: m.level[t], unit: "× neighbours' level", message: `${where}, channel ${ch}: dead (level ${fmt(m.level[t], 3)} × its neighbours').` });
        }
        continue;
      }
      const r = m.noise[t] / noiseRef;
      if (r > th.noisyTraceRatio) {
        mark(si, ch, noisyShot[si] && shotNoise[si] >= th.noisyBlowReshootRatio ? "reshoot" : "warn", `noise ${fmt(r)} × the folder's median`);
        if (!noisyShot[si] && chv.noisyShots / present[col.get(ch)!] < th.deadChannelShare) {
          add({ kind: "noisy-trace", verdict: "warn", channel: ch, value: r, unit: "× median noise", message: `${where}, channel ${ch}: noise ${fmt(r)} × the folder's median.` });
        }
      } else if (noisyShot[si]) {
        mark(si, ch, shotNoise[si] >= th.noisyBlowReshootRatio ? "reshoot" : "warn", "in a noisy blow");
      }
      if (m.polarity[t] < th.reversedScore) {
        mark(si, ch, "warn", `reversed polarity (correlation ${fmt(m.polarity[t], 2)} with its neighbours)`);
        if (chv.reversedShots / present[col.get(ch)!] < th.reversedChannelShare) {
          add({ kind: "reversed-trace", verdict: "warn", channel: ch, value: m.polarity[t], unit: "correlation", message: `${where}, channel ${ch}: reversed polarity (correlation ${fmt(m.polarity[t], 2)} with its neighbours).` });
        }
      }
      if (m.clipped[t] >= th.clipWarnSamples) {
        const v: Exclude<Verdict, "ok"> = m.clipped[t] >= th.clipReshootSamples ? "reshoot" : "warn";
        mark(si, ch, v, `${m.clipped[t]} clipped samples`);
        add({ kind: "clipped", verdict: v, channel: ch, value: m.clipped[t], unit: "samples", message: `${where}, channel ${ch}: ${m.clipped[t]} clipped samples: lower the gain or hit softer${v === "reshoot" ? " and repeat the blow" : ""}.` });
      }
      if (m.humDb[t] >= th.humWarnDb) {
        const v: Exclude<Verdict, "ok"> = th.humReshootDb !== null && m.humDb[t] >= th.humReshootDb ? "reshoot" : "warn";
        mark(si, ch, v, `mains hum ${fmt(m.humDb[t])} dB at ${fmt(m.humHz[t], 0)} Hz`);
        add({ kind: "mains-hum", verdict: v, channel: ch, value: m.humDb[t], unit: "dB", message: `${where}, channel ${ch}: mains hum ${fmt(m.humDb[t])} dB above the neighbouring band at ${fmt(m.humHz[t], 0)} Hz: check the cable's route and the geophone's coupling.` });
      }
    }
    return {
      gatherId: s.id,
      file: s.file,
      sourcePoint: s.sourcePoint,
      blow: s.blow,
      loggedSourceXM: s.sourceX,
      verdict,
      reasons,
      noiseRatio: nr,
      fittedSourceXM: estimateX,
      sourceErrorM: errorM,
      triggerSlipMs: slipMs,
      humDb: median(m.humDb),
      symmetry: judged ? fit.symmetry : NaN,
      symmetryAtLog: judged ? fit.symmetryAtLog : NaN,
      triggerPartners: lags[si].length,
      blowsAlike: partners[si].map((j) => shots[j].id),
    };
  });

  const cells: FieldCheckResult["cells"] = [];
  for (const [k, c] of [...cellReasons.entries()].sort((a, b) => a[0] - b[0])) {
    grid[k] = RANK[c.verdict];
    if (c.verdict !== "ok") cells.push({ shot: Math.floor(k / nc), channel: channels[k % nc], verdict: c.verdict, reasons: c.reasons });
  }
  const traces = shots.reduce((n, s) => n + s.channel.length, 0);
  const counts = {
    shots: shots.length,
    traces,
    warn: grid.filter((v) => v === 1).length,
    reshoot: grid.filter((v) => v === 2).length,
    shotsReshoot: shotVerdicts.filter((s) => s.verdict === "reshoot").length,
    shotsWarn: shotVerdicts.filter((s) => s.verdict === "warn").length,
  };
  const verdict = findings.reduce<Verdict>((v, f) => worse(v, f.verdict), "ok");
  return {
    channels,
    shots: shotVerdicts,
    channelVerdicts,
    grid,
    measures: cellMeasures,
    cells,
    findings,
    reference: { noiseRms: noiseRef },
    counts,
    verdict,
  };
}
