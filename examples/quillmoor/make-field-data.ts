/**
 * Makes the invented field data of line QM-1 at Quillmoor (see README.md and the demo scenario):
 * one SEG-2 file per hammer blow (26 source points × 4 blows, 48 channels, 0.25 ms, 0.5 s,
 * 10 ms pre-trigger) and the crew's geometry table, with one deliberate logging mistake.
 *
 *   npx tsx examples/quillmoor/make-field-data.ts [outDir]     (default examples/quillmoor/field/)
 *
 * Deterministic: the same seed gives byte-identical files. The noise-free waveforms come from
 * {@link traceSynthesiser}, a simple analytic layered-ground model; pass another synthesiser
 * (e.g. a finite-difference solver) through the `synthesise` option to replace it.
 */
import { mkdirSync, writeFileSync } from "node:fs";
import path from "node:path";
import { fileURLToPath, pathToFileURL } from "node:url";
import { writeSeg2 } from "../../pipeline/io/seg2";
import { gaussianSource as gaussian, mulberry32 } from "../../pipeline/kernels/random";

/** Layout of one shot for a synthesiser. Positions in m along the line, times in s. */
export interface ShotLayout {
  sourceX: number;
  receiverX: number[];
  startTimeS: number;
  sampleIntervalS: number;
  sampleCount: number;
}

/** Computes a noise-free shot gather, flat `[trace][sample]`, length receiverX.length · sampleCount. */
export type ShotSynthesiser = (shot: ShotLayout) => Float32Array;

/** The hidden "true" ground of the scenario, as the analytic model uses it. */
export interface AnalyticGround {
  /** P velocity above the water table, m/s. */
  vpTop: number;
  /** P velocity below the water table, m/s. */
  vpBelow: number;
  /** Water table depth, m. */
  waterTableDepthM: number;
  /** Shear velocity at the surface and at `vsDepthM`, m/s (linear between). */
  vsSurface: number;
  vsDeep: number;
  vsDepthM: number;
  /** Quality factor of the surface wave. */
  q: number;
  /** Infilled hollow: centre, half-width at the top (m), and its slowness factor for surface waves. */
  hollowCentreX: number;
  hollowHalfWidthM: number;
  hollowSlowdown: number;
}

export const QUILLMOOR_GROUND: AnalyticGround = {
  vpTop: 400,
  vpBelow: 1600,
  waterTableDepthM: 4,
  vsSurface: 140,
  vsDeep: 320,
  vsDepthM: 15,
  q: 20,
  hollowCentreX: 27,
  hollowHalfWidthM: 3,
  hollowSlowdown: 1.5,
};

/** Hammer source pulse: a causal Berlage wavelet t² e^(−αt) sin(2πft) (Aldridge 1990, Geophysics 55). */
function berlage(t: number): number {
  if (t <= 0) return 0;
  const f = 35;
  const alpha = 160;
  // Normalised so that the peak is about 1 (envelope t² e^(−αt) peaks at t = 2/α).
  const tp = 2 / alpha;
  const norm = 1 / (tp * tp * Math.exp(-2));
  return norm * t * t * Math.exp(-alpha * t) * Math.sin(2 * Math.PI * f * t);
}

/**
 * Rayleigh-wave phase velocity of the gradient ground, m/s: about 0.92 · Vs at a depth of a third
 * of a wavelength (a rule of thumb of surface-wave practice), clipped to 120–300 m/s.
 */
function phaseVelocity(g: AnalyticGround, f: number): number {
  let c = 200;
  for (let i = 0; i < 30; i++) {
    const z = Math.min(c / f / 3, g.vsDepthM);
    const vs = g.vsSurface + ((g.vsDeep - g.vsSurface) * z) / g.vsDepthM;
    c = 0.92 * vs;
  }
  return Math.min(300, Math.max(120, c));
}

/** Length of the segment [a, b] inside the hollow's top width. */
function lengthInHollow(g: AnalyticGround, a: number, b: number): number {
  const lo = Math.max(Math.min(a, b), g.hollowCentreX - g.hollowHalfWidthM);
  const hi = Math.min(Math.max(a, b), g.hollowCentreX + g.hollowHalfWidthM);
  return Math.max(0, hi - lo);
}

/**
 * The analytic waveform source: direct P wave, head wave refracted at the water table, a dispersive
 * surface wave built by summing frequency components with their own phase velocity (geometric
 * spreading 1/√r, attenuation e^(−πfr/(Qc))), slowed where its path crosses the infilled hollow,
 * and a weak wave scattered from the hollow. Not a solution of the wave equation: it gives data with
 * the right look (arrival times, dispersion, amplitude decay) for processing demos.
 */
export function traceSynthesiser(shot: ShotLayout, ground: AnalyticGround = QUILLMOOR_GROUND): Float32Array {
  const { sourceX, receiverX, startTimeS: t0, sampleIntervalS: dt, sampleCount: ns } = shot;
  const out = new Float32Array(receiverX.length * ns);
  // Spectrum of the source pulse at the summed frequencies (numerical Fourier transform).
  const df = 0.5;
  const freqs: number[] = [];
  for (let f = 4; f <= 90; f += df) freqs.push(f);
  const wr = new Float64Array(freqs.length);
  const wi = new Float64Array(freqs.length);
  const vel = new Float64Array(freqs.length);
  const tau = 1e-4;
  for (let j = 0; j < freqs.length; j++) {
    let re = 0;
    let im = 0;
    for (let t = 0; t < 0.1; t += tau) {
      const w = berlage(t);
      re += w * Math.cos(2 * Math.PI * freqs[j] * t) * tau;
      im -= w * Math.sin(2 * Math.PI * freqs[j] * t) * tau;
    }
    // Cosine tapers at the ends of the summed band keep the truncation ringing small.
    const f = freqs[j];
    const taper = f < 8 ? Math.sin((Math.PI / 2) * ((f - 4) / 4)) ** 2 : f > 70 ? Math.cos((Math.PI / 2) * ((f - 70) / 20)) ** 2 : 1;
    wr[j] = re * taper;
    wi[j] = im * taper;
    vel[j] = phaseVelocity(ground, freqs[j]);
  }
  const { vpTop: v1, vpBelow: v2, waterTableDepthM: h } = ground;
  const ic = Math.asin(v1 / v2);
  const headIntercept = (2 * h * Math.cos(ic)) / v1;
  const criticalDistance = 2 * h * Math.tan(ic);

  for (let r = 0; r < receiverX.length; r++) {
    const row = r * ns;
    const x = receiverX[r];
    const dist = Math.abs(x - sourceX);
    const rEff = Math.max(dist, 0.5);
    // Body waves in the time domain.
    const tP = dist / v1;
    const aP = 0.12 / rEff;
    const tHead = dist / v2 + headIntercept;
    const aHead = dist > criticalDistance ? 0.25 / (rEff * Math.sqrt(rEff)) : 0;
    for (let k = 0; k < ns; k++) {
      const t = t0 + k * dt;
      out[row + k] += aP * berlage(t - tP) + aHead * berlage(t - tHead);
    }
    // Surface wave and the wave scattered at the hollow, by frequency summation
    // u(t) = 2 Re Σ W(f) A(f) e^{i2πf(t − τ(f))} df, with the phasor rotated sample by sample.
    const inHollow = lengthInHollow(ground, sourceX, x);
    const r1 = Math.max(Math.abs(sourceX - ground.hollowCentreX), 1);
    const r2 = Math.max(Math.abs(x - ground.hollowCentreX), 1);
    for (let j = 0; j < freqs.length; j++) {
      const f = freqs[j];
      const c = vel[j];
      const waves: Array<[number, number]> = [
        [dist / c + (inHollow * (ground.hollowSlowdown - 1)) / c, (1 / Math.sqrt(rEff)) * Math.exp((-Math.PI * f * dist) / (ground.q * c))],
        [r1 / c + (r2 * ground.hollowSlowdown) / c, (0.25 / Math.sqrt(r1 * r2)) * Math.exp((-Math.PI * f * (r1 + r2)) / (ground.q * c))],
      ];
      const step = 2 * Math.PI * f * dt;
      const cs = Math.cos(step);
      const sn = Math.sin(step);
      for (const [delay, amp] of waves) {
        const a = 2 * df * amp;
        const th = 2 * Math.PI * f * (t0 - delay);
        let cr = Math.cos(th);
        let ci = Math.sin(th);
        const br = a * wr[j];
        const bi = a * wi[j];
        for (let k = 0; k < ns; k++) {
          out[row + k] += br * cr - bi * ci;
          const nr = cr * cs - ci * sn;
          ci = ci * cs + cr * sn;
          cr = nr;
        }
      }
    }
  }
  return out;
}

export interface QuillmoorOptions {
  /** Seed of every random choice. @default 20241112 */
  seed?: number;
  /** Number of source points (every 2 m from x = −1 m). @default 26 */
  sourcePoints?: number;
  /** Blows per source point. @default 4 */
  blows?: number;
  /** Channels (1 m apart from x = 0). @default 48 */
  channels?: number;
  /** @default 0.00025 s */
  sampleIntervalS?: number;
  /** @default 0.5 s */
  recordLengthS?: number;
  /** Time of the first sample (pre-trigger), s. @default -0.01 */
  startTimeS?: number;
  /** Channel recorded as all zeros. @default 31 */
  deadChannel?: number;
  /** Noise-free waveform source. @default traceSynthesiser with QUILLMOOR_GROUND */
  synthesise?: ShotSynthesiser;
}

export interface QuillmoorSurvey {
  files: Array<{ name: string; bytes: Uint8Array }>;
  /** The crew's geometry table (spread form), with the logging mistake at sp14-b3 and sp14-b4. */
  geometryCsv: string;
  /** What was planted, for checks that must find it (the field check's test). */
  faults: {
    /** Channel recorded as all zeros. */
    deadChannel: number;
    /** Blows made weak (a glancing hit) or noisy (a gust, a passing lorry). */
    oddBlows: Array<{ file: string; sourcePoint: number; blow: number; kind: "weak" | "noisy" }>;
    /** Blows logged at another source position than they were shot at. */
    mislogged: Array<{ file: string; sourceX: number; loggedSourceX: number }>;
  };
}

const SP_SPACING_M = 2;
const FIRST_SP_X = -1;

/** The shot layouts of the survey (one per source point), as a synthesiser sees them. */
export function quillmoorShotLayouts(options: QuillmoorOptions = {}): ShotLayout[] {
  const nSp = options.sourcePoints ?? 26;
  const nCh = options.channels ?? 48;
  const dt = options.sampleIntervalS ?? 0.00025;
  const ns = Math.round((options.recordLengthS ?? 0.5) / dt);
  const receiverX = Array.from({ length: nCh }, (_, i) => i * 1.0);
  return Array.from({ length: nSp }, (_, i) => ({
    sourceX: FIRST_SP_X + i * SP_SPACING_M,
    receiverX,
    startTimeS: options.startTimeS ?? -0.01,
    sampleIntervalS: dt,
    sampleCount: ns,
  }));
}

/** File name of a blow, e.g. "sp07-b2.sg2". */
export function blowFileName(sourcePoint: number, blow: number): string {
  return `sp${String(sourcePoint).padStart(2, "0")}-b${blow}.sg2`;
}

/**
 * Makes the whole survey in memory. The SEG-2 keywords carry the TRUE source and receiver positions;
 * the geometry table logs blows 3 and 4 of source point 14 at source point 15 (x = 27 m instead of
 * 25 m), the mistake the geometry check should find.
 */
export function makeQuillmoorSurvey(options: QuillmoorOptions = {}): QuillmoorSurvey {
  const seed = options.seed ?? 20241112;
  const nSp = options.sourcePoints ?? 26;
  const nBlows = options.blows ?? 4;
  const nCh = options.channels ?? 48;
  const dt = options.sampleIntervalS ?? 0.00025;
  const t0 = options.startTimeS ?? -0.01;
  const ns = Math.round((options.recordLengthS ?? 0.5) / dt);
  const dead = options.deadChannel ?? 31;
  const synthesise = options.synthesise ?? ((shot: ShotLayout) => traceSynthesiser(shot));
  const receiverX = Array.from({ length: nCh }, (_, i) => i * 1.0);
  const u = mulberry32(seed);
  const gauss = gaussian(u);
  const files: QuillmoorSurvey["files"] = [];
  const faults: QuillmoorSurvey["faults"] = { deadChannel: dead, oddBlows: [], mislogged: [] };
  const rows: string[] = [];
  const noise = new Float64Array(ns + 2000);
  const wind = new Float64Array(ns);

  for (let sp = 1; sp <= nSp; sp++) {
    const sx = FIRST_SP_X + (sp - 1) * SP_SPACING_M;
    const clean = synthesise({ sourceX: sx, receiverX, startTimeS: t0, sampleIntervalS: dt, sampleCount: ns });
    // One blow in a few is weak (a glancing hit) or noisy (a gust, a passing lorry).
    const oddBlow = u() < 0.5 ? 1 + Math.floor(u() * nBlows) : 0;
    const oddKind = u() < 0.5 ? "weak" : "noisy";
    for (let b = 1; b <= nBlows; b++) {
      const strength = (0.85 + 0.3 * u()) * (b === oddBlow && oddKind === "weak" ? 0.3 : 1);
      // A calm November morning: wind and traffic well below the hammer's surface wave at the
      // frequencies the inversion starts from (about 20 Hz), except on the odd noisy blow (a gust or
      // a passing lorry: 40 times the wind). After the stack, the processing and a 25 Hz low-pass,
      // the first 300 ms of a trace at 8 to 24 m offset carry 8 to 13 times the power of its last 80 ms (median; 2 to 3.5 with three times
      // the wind and four times the traffic, where the inversion's first stage fit mostly noise).
      const windLevel = (0.00015 + 0.0003 * u()) * (b === oddBlow && oddKind === "noisy" ? 40 : 1);
      const trafficLevel = 0.000075 + 0.000175 * u();
      const humLevel = 0.0008;
      const humPhase = 2 * Math.PI * u();
      // Traffic: narrow-band noise near 12 Hz (two-pole resonator) arriving from the east end at 250 m/s.
      const r = 0.995;
      const w = 2 * Math.PI * 12 * dt;
      let y1 = 0;
      let y2 = 0;
      for (let k = 0; k < noise.length; k++) {
        const y = gauss() * (1 - r) + 2 * r * Math.cos(w) * y1 - r * r * y2;
        y2 = y1;
        y1 = y;
        noise[k] = y;
      }
      normaliseRms(noise);
      const traces = receiverX.map((rx, c) => {
        const s = new Float32Array(ns);
        if (c + 1 === dead) return { strings: traceStrings(c + 1, sx, rx, dt, t0), samples: s };
        const gust = 0.5 + u();
        // Wind: white noise through a one-pole low-pass (about 60 Hz) minus a slower one (about 5 Hz).
        const aFast = Math.exp(-2 * Math.PI * 60 * dt);
        const aSlow = Math.exp(-2 * Math.PI * 5 * dt);
        let fast = 0;
        let slow = 0;
        const lag = Math.round(((nCh - 1 - rx) / 250) / dt);
        const humAmp = humLevel * (0.8 + 0.4 * u());
        for (let k = 0; k < ns; k++) {
          const e = gauss();
          fast = aFast * fast + (1 - aFast) * e;
          slow = aSlow * slow + (1 - aSlow) * e;
          wind[k] = fast - slow;
        }
        normaliseRms(wind);
        for (let k = 0; k < ns; k++) {
          const t = t0 + k * dt;
          s[k] =
            strength * clean[c * ns + k] +
            windLevel * gust * wind[k] +
            trafficLevel * noise[k + lag] +
            humAmp * Math.sin(2 * Math.PI * 50 * t + humPhase);
        }
        return { strings: traceStrings(c + 1, sx, rx, dt, t0), samples: s };
      });
      const name = blowFileName(sp, b);
      if (b === oddBlow) faults.oddBlows.push({ file: name, sourcePoint: sp, blow: b, kind: oddKind });
      const seq = (sp - 1) * nBlows + b;
      files.push({
        name,
        bytes: writeSeg2({
          fileStrings: {
            ACQUISITION_DATE: "12/NOV/2024",
            ACQUISITION_TIME: clock(9 * 3600 + 40 * 60 + seq * 45),
            CLIENT: "Quillmoor Education Trust",
            COMPANY: "Corvell Ground Imaging",
            JOB_ID: "QM-2024-11",
            LINE_ID: "QM-1",
            OBSERVER: "Rosa Okafor-Lind",
            TRACE_SORT: "AS_ACQUIRED",
            UNITS: "METERS",
            NOTE: `Source point ${sp}, blow ${b}\nSledgehammer on steel plate, vertical`,
          },
          traces: traces.map((t) => ({ strings: { ...t.strings, SHOT_SEQUENCE_NUMBER: String(seq) }, samples: t.samples })),
        }),
      });
      // The field log: blows 3 and 4 of source point 14 were written down at source point 15.
      const mistake = sp === 14 && b >= 3 && nSp >= 15;
      const loggedSp = mistake ? 15 : sp;
      const loggedX = FIRST_SP_X + (loggedSp - 1) * SP_SPACING_M;
      if (mistake) faults.mislogged.push({ file: name, sourceX: sx, loggedSourceX: loggedX });
      rows.push(`${name},${loggedSp},${b},${loggedX.toFixed(1)},0.0,1.0,${nCh}`);
    }
  }
  const geometryCsv = [
    "# Line QM-1, Quillmoor playing field, 12 Nov 2024. Written in the field by T. Whitcombe.",
    "# Geophones 1 m apart from x = 0 m; source points every 2 m from x = -1 m; 4 blows each.",
    "file,source_point,blow,source_x_m,first_channel_x_m,channel_spacing_m,channel_count",
    ...rows,
    "",
  ].join("\n");
  return { files, geometryCsv, faults };
}

/** Scales `a` in place to unit root-mean-square. */
function normaliseRms(a: Float64Array): void {
  let e = 0;
  for (let i = 0; i < a.length; i++) e += a[i] * a[i];
  const scale = e > 0 ? 1 / Math.sqrt(e / a.length) : 0;
  for (let i = 0; i < a.length; i++) a[i] *= scale;
}

function traceStrings(channel: number, sx: number, rx: number, dt: number, t0: number): Record<string, string> {
  return {
    CHANNEL_NUMBER: String(channel),
    SAMPLE_INTERVAL: String(dt),
    DELAY: String(t0),
    SOURCE_LOCATION: String(sx),
    RECEIVER_LOCATION: String(rx),
    STACK: "1",
    LINE_ID: "QM-1",
    RECEIVER: "GEOPHONE VERTICAL 4.5 HZ",
    SOURCE: "SLEDGEHAMMER",
  };
}

function clock(seconds: number): string {
  const h = Math.floor(seconds / 3600);
  const m = Math.floor((seconds % 3600) / 60);
  const s = seconds % 60;
  return [h, m, s].map((v) => String(v).padStart(2, "0")).join(":");
}

/** Writes the survey to `outDir` (created if missing). */
export function writeQuillmoorSurvey(outDir: string, options: QuillmoorOptions = {}): QuillmoorSurvey {
  const survey = makeQuillmoorSurvey(options);
  mkdirSync(outDir, { recursive: true });
  for (const f of survey.files) writeFileSync(path.join(outDir, f.name), f.bytes);
  writeFileSync(path.join(outDir, "qm1-geometry.csv"), survey.geometryCsv);
  return survey;
}

if (process.argv[1] && import.meta.url === pathToFileURL(path.resolve(process.argv[1])).href) {
  // Usage: make-field-data.ts [outDir] [--analytic]
  // By default the waveforms come from the finite-difference solver through the hidden true
  // model (true-ground.ts); --analytic uses the quick analytic stand-in instead.
  const here = path.dirname(fileURLToPath(import.meta.url));
  const args = process.argv.slice(2);
  const analytic = args.includes("--analytic");
  const outDir = path.resolve(args.find((a) => !a.startsWith("--")) ?? path.join(here, "field"));
  let synthesise: ShotSynthesiser | undefined;
  let closePool: (() => Promise<void>) | undefined;
  if (!analytic) {
    const { createWorkerPool } = await import("../../pipeline/workers/pool");
    const { solverSynthesiser } = await import("./true-ground");
    const pool = createWorkerPool();
    closePool = () => pool.close();
    const started = Date.now();
    const tty = Boolean(process.stdout.isTTY);
    synthesise = await solverSynthesiser(quillmoorShotLayouts(), pool, (done, total) => {
      if (tty) process.stdout.write(`\r  modelling the true ground: shot ${done} of ${total}`);
      else if (done % 5 === 0 || done === total) process.stdout.write(`  modelling the true ground: ${done} of ${total} shots\n`);
    });
    process.stdout.write(`${tty ? "\r" : ""}  modelled 26 shots through the true ground in ${((Date.now() - started) / 1000).toFixed(1)} s\n`);
  }
  const survey = writeQuillmoorSurvey(outDir, { synthesise });
  await closePool?.();
  const bytes = survey.files.reduce((s, f) => s + f.bytes.length, 0);
  process.stdout.write(`Wrote ${survey.files.length} SEG-2 files (${(bytes / 1e6).toFixed(1)} MB) and qm1-geometry.csv to ${outDir}\n`);
}
