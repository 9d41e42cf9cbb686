/**
 * Shared data types that flow between pipeline steps.
 *
 * Every value a step reads or writes lives in a named *slot* (see {@link SlotValues}).
 * The runner stores each slot value as a content-addressed artifact (see artifact-codec.ts),
 * so everything here must be plain data: numbers, strings, booleans, arrays, plain objects
 * and typed arrays. No classes, Maps, Dates or functions.
 *
 * Units are SI throughout: metres, seconds, m/s, kg/m³.
 */

/** Particle-motion component a trace records. */
export type Component = "z" | "x" | "y";

/** Per-trace header, our own field names. Positions in metres along the profile. */
export interface TraceHeader {
  /** Field file (or synthetic shot label) this trace came from. */
  sourceFile: string;
  /** Channel number within its record, 1-based. */
  channel: number;
  /** Source point number from the field log (the stack groups on it). */
  sourcePoint: number;
  /** Blow (repeat) number at this source point, 1-based; 0 once stacked. */
  blow: number;
  /** Source position, m. */
  sourceX: number;
  /** Source elevation / depth, m (positive down; 0 at the surface). */
  sourceZ: number;
  /** Receiver position, m. */
  receiverX: number;
  /** Receiver depth, m (positive down). */
  receiverZ: number;
  /** Signed offset receiverX - sourceX, m. */
  offset: number;
  /** Number of records summed into this trace (1 for a single blow). */
  stackCount: number;
  /** Recorded component. */
  component: Component;
  /** True when the trace is known dead or killed; its samples are zero. */
  dead: boolean;
}

/** One shot gather (or one field record before stacking). */
export interface Gather {
  /** Stable label, e.g. "SP07-b2" for one blow or "SP07" once stacked. */
  id: string;
  /** Sample interval, s. */
  sampleIntervalS: number;
  /** Samples per trace. */
  sampleCount: number;
  /** Time of the first sample relative to the source instant, s (negative for pre-trigger). */
  startTimeS: number;
  /** One header per trace, same order as the rows of {@link Gather.data}. */
  traces: TraceHeader[];
  /** Samples, flat row-major `[trace][sample]`, length traces.length * sampleCount. */
  data: Float32Array;
}

/** A set of gathers: the working data most steps read and write. */
export interface GatherSet {
  kind: "gathers";
  gathers: Gather[];
}

/** One raw field file handed to the import step by the runner. */
export interface FieldFile {
  /** File name relative to the dataset folder. */
  name: string;
  /** SHA-256 of the bytes, hex. */
  sha256: string;
  bytes: Uint8Array;
}

/** The dataset's files, read by the runner (steps never touch the disk). */
export interface FieldFileSet {
  kind: "field-files";
  files: FieldFile[];
}

/** A text file named by the pipeline file (e.g. the geometry table), read by the runner. */
export interface TextInput {
  kind: "text";
  /** File name as given in the pipeline file. */
  name: string;
  text: string;
}

/** First-arrival picks, one entry per trace that has a pick. */
export interface PickSet {
  kind: "picks";
  /** Method that made the picks, e.g. "energy-ratio" or "information-criterion". */
  method: string;
  picks: Array<{
    gatherId: string;
    traceIndex: number;
    /** Pick time relative to the source instant, s. */
    timeS: number;
    /** Quality in [0, 1], higher is better. */
    quality: number;
    /** True when the pick breaks the smooth offset-time trend. */
    flagged: boolean;
    /** "hand" when the pick comes from the step's `pickEdits` (absent in picks made before hand edits existed: automatic). */
    origin?: "automatic" | "hand";
  }>;
}

/** Mute lines per gather, for drawing and for reuse. Times relative to the source instant, s. */
export interface MuteSet {
  kind: "mutes";
  lines: Array<{
    gatherId: string;
    /** "top", "bottom" or "window-start" / "window-end". */
    role: string;
    /** Per trace of the gather, time of the line, s. */
    timesS: Float32Array;
    /** Cosine taper length, s. */
    taperS: number;
  }>;
}

/** Amplitude spectra, per gather: mean over traces and per trace. */
export interface SpectrumSet {
  kind: "spectra";
  /** Frequency axis, Hz. */
  frequenciesHz: Float32Array;
  gathers: Array<{
    gatherId: string;
    /** Mean amplitude spectrum over the live traces. */
    mean: Float32Array;
    /** Per-trace amplitude spectra, flat `[trace][frequency]`. */
    perTrace: Float32Array;
  }>;
}

/**
 * Elastic model on a regular grid. Arrays are flat row-major `[z][x]`
 * (row iz = depth originZ + iz*spacing, column ix = originX + ix*spacing).
 */
export interface ElasticModel {
  kind: "model";
  nx: number;
  nz: number;
  /** Grid spacing, m (square cells). */
  spacingM: number;
  /** Position of column 0, m along the profile. */
  originX: number;
  /** Depth of row 0, m (0 = free surface). */
  originZ: number;
  /** P velocity, m/s. */
  vp: Float32Array;
  /** S velocity, m/s. */
  vs: Float32Array;
  /** Density, kg/m³. */
  rho: Float32Array;
}

/**
 * Velocity from first-arrival travel-time tomography (step "first-arrival-tomography") on its own
 * regular grid, with what tells where to trust it. Node grids are flat row-major `[z][x]`
 * (row iz = depth originZ + iz*spacingM, column ix = originX + ix*spacingM), as in
 * {@link ElasticModel}. To blend into a starting model, take `velocity` where `coverageM` is at
 * least `coverageThresholdM`, i.e. above `reachDepthM` of the column, and the other model below.
 */
export interface Tomogram {
  kind: "tomogram";
  /** Which velocity the picks measured: "p" (Vp) or "s" (Vs from SH picks). */
  wave: "p" | "s";
  nx: number;
  nz: number;
  /** Grid spacing, m (square cells). */
  spacingM: number;
  /** Position of column 0, m along the profile. */
  originX: number;
  /** Depth of row 0, m (0 = surface). */
  originZ: number;
  /** Inverted velocity (Vp or Vs as `wave` says), m/s, `[z][x]`. */
  velocity: Float32Array;
  /** Starting velocity of the inversion, m/s, `[z][x]`. */
  startingVelocity: Float32Array;
  /** Ray length per node cell (each node owns the h×h square around it) in the final model, m, `[z][x]`. */
  coverageM: Float32Array;
  /** Number of rays touching each node cell in the final model, `[z][x]`. */
  rayCount: Int32Array;
  /** Coverage (m of ray per cell) above which a cell counts as covered. */
  coverageThresholdM: number;
  /** Per column: depth (m, absolute) of the deepest node with coverage ≥ coverageThresholdM; NaN for none. */
  reachDepthM: Float32Array;
  /** Final rays for drawing (about one point per cell): x, z pairs (m, absolute) of every ray concatenated; ray i spans points rayStart[i] … rayStart[i+1]−1 and runs receiver → source. */
  rayPoints: Float32Array;
  /** Start of each ray in rayPoints (in points), one entry per pick in `picks` that was used, plus one. */
  rayStart: Int32Array;
  /** Every pick used, in the order of the rays: observed and modelled times, s. */
  picks: Array<{
    gatherId: string;
    traceIndex: number;
    sourceX: number;
    receiverX: number;
    /** Observed first-arrival time, s. */
    observedS: number;
    /** Modelled time through the starting model, s. */
    startingModelledS: number;
    /** Modelled time through the final model, s. */
    modelledS: number;
    /** Uncertainty (one standard deviation) used as the data weight, s. */
    uncertaintyS: number;
    /** True when the picker flagged it (used only when the step was told to keep flagged picks). */
    flagged: boolean;
  }>;
  /** Residual per iteration: 0 is the starting model, the last is the final model. */
  iterations: Array<{
    iteration: number;
    /** Root-mean-square of observed − modelled, s. */
    rmsS: number;
    /** Root-mean-square residual in units of the pick uncertainties. */
    weightedRms: number;
  }>;
}

/** Wavefield snapshots at chosen times (one shot), flat `[frame][z][x]`. */
export interface SnapshotSet {
  kind: "snapshots";
  shotId: string;
  component: string;
  nx: number;
  nz: number;
  spacingM: number;
  originX: number;
  originZ: number;
  timesS: number[];
  frames: Float32Array;
}

/** A small JSON document a step produces (tables, per-iteration curves, reports). */
export interface JsonDocument {
  kind: "json";
  /** What the document is, e.g. "geometry-check" or "misfit". */
  role: string;
  data: unknown;
}

/**
 * One dispersion curve: phase velocity against frequency for one mode. Picks that were not made
 * (no clear maximum) are left out, so both arrays have the same length and increase in frequency.
 */
export interface DispersionCurve {
  /** Mode number: 0 the fundamental Rayleigh mode, 1 the first higher mode, ... */
  mode: number;
  /** "automatic" (picked by the step), "hand" (given in the step's settings) or "modelled" (a 1D result's forward curve). */
  origin: "automatic" | "hand" | "modelled";
  /** Frequencies, Hz. */
  frequenciesHz: Float64Array;
  /** Phase velocities, m/s. */
  velocitiesMps: Float64Array;
}

/**
 * Dispersion images by the phase-shift method (Park, Miller & Xia 1998), one per window of
 * receivers along the line, on shared axes, with their picks. Everything a drawing needs: the
 * image grid, its axes, the picked curves and, once surface-wave-profile has run, the modelled
 * curve of each window's 1D result.
 */
export interface DispersionSet {
  kind: "dispersion";
  /** Frequency axis, Hz (rows of each image). */
  frequenciesHz: Float64Array;
  /** Trial phase-velocity axis, m/s (columns of each image). */
  velocitiesMps: Float64Array;
  /** "per-frequency": each image row divided by its maximum (values in [0, 1]); "none": mean coherence over the stacked shots, in [0, 1]. */
  normalisation: "per-frequency" | "none";
  windows: Array<{
    /** Stable label, e.g. "W01". */
    id: string;
    /** Position of the window along the line (middle of its receivers), m. */
    centreX: number;
    /** First and last receiver position of the window, m. */
    receiverX0: number;
    receiverX1: number;
    /** Gathers (shots) that contributed, and how many traces in all. */
    gatherIds: string[];
    traceCount: number;
    /** Smallest and largest |offset| used, m. */
    minOffsetM: number;
    maxOffsetM: number;
    /** Image, flat `[frequency][velocity]`, frequencies × velocities values. */
    image: Float32Array;
    /**
     * Picked curves: the automatic fundamental-mode pick, and hand picks from the step's settings
     * when given (the inversion uses the hand pick of mode 0 when there is one).
     */
    picks: DispersionCurve[];
    /** Forward-modelled curve of this window's 1D Vs result (written by surface-wave-profile). */
    modelled?: DispersionCurve;
  }>;
}

/** One 1D layered profile from the inversion of a window's dispersion curve. */
export interface VelocityProfile {
  /** Window id in the `dispersion` slot, e.g. "W01". */
  windowId: string;
  /** Position along the line, m. */
  centreX: number;
  /** Layer thicknesses, m, top down; the last entry (the half-space) is 0. */
  thicknessM: Float64Array;
  /** S velocity per layer (last: half-space), m/s. */
  vs: Float64Array;
  /** P velocity per layer from Vs by the step's rule, m/s. */
  vp: Float64Array;
  /** Density per layer by the step's rule, kg/m³. */
  rho: Float64Array;
  /** The curve inverted (hand or automatic pick of mode 0). */
  observed: DispersionCurve;
  /** The 1D result's forward curve at the observed frequencies. */
  modelled: DispersionCurve;
  /** Root-mean-square of modelled − observed, m/s. */
  rmsMisfitMps: number;
  /** rms misfit after each accepted model update (first: the starting model), m/s. */
  misfitHistoryMps: number[];
  iterations: number;
  converged: boolean;
  /** Longest wavelength picked, m. */
  longestWavelengthM: number;
  /** Depth the curve constrains, m: a set fraction (a third to a half, common practice) of the longest wavelength. */
  depthOfInvestigationM: number;
}

/** 1D Vs profiles along the line from surface-wave dispersion, with their fits. */
export interface VelocityProfileSet {
  kind: "velocity-profiles";
  /** How Vp was set from Vs, in words (e.g. "Poisson's ratio 0.3"). */
  vpRule: string;
  /** How density was set, in words (e.g. "constant 1800 kg/m³" or "Gardner et al. 1974"). */
  densityRule: string;
  profiles: VelocityProfile[];
}

/** Every slot a pipeline carries, by name. A step declares which it reads and writes. */
export interface SlotValues {
  /** Raw field files of the dataset (filled by the runner). */
  fieldFiles: FieldFileSet;
  /** The geometry table named in the pipeline file (filled by the runner). */
  geometryTable: TextInput;
  /** The working gathers: field data as processed so far. */
  gathers: GatherSet;
  /** First-arrival picks. */
  picks: PickSet;
  /** Mute lines. */
  mutes: MuteSet;
  /** Amplitude spectra. */
  spectra: SpectrumSet;
  /** The current elastic model. */
  model: ElasticModel;
  /** Synthetic gathers from forward modelling. */
  synthetic: GatherSet;
  /** Wavefield snapshots. */
  snapshots: SnapshotSet;
  /** A wavelet per shot or one for all, as gathers with one trace each. */
  wavelet: GatherSet;
  /** A per-step report. */
  report: JsonDocument;
  /** Velocity from first-arrival travel-time tomography, with ray coverage and fit. */
  tomogram: Tomogram;
  /** Dispersion images with picks (dispersion-image; modelled curves added by surface-wave-profile). */
  dispersion: DispersionSet;
  /** 1D Vs profiles from the dispersion curves (surface-wave-profile). */
  velocityProfiles: VelocityProfileSet;
}

export type SlotName = keyof SlotValues;

/** Slots the runner fills from disk rather than from a step. */
export const RUNNER_SLOTS: readonly SlotName[] = ["fieldFiles", "geometryTable"] as const;
