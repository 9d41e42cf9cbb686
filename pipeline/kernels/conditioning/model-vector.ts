/**
 * Mapping between the elastic model on its grid (vp, vs, rho Float32Array, flat `[z][x]`) and the
 * optimiser's vector x (Float64Array) for the inverted parameter set.
 *
 * Layout of x: one block of nx·nz values per inverted parameter, in the order Vs, Vp, ρ
 * (`[parameter][z][x]`): "vs" → [Vs]; "vs-vp" → [Vs, Vp]; "vs-vp-rho" → [Vs, Vp, ρ].
 *
 * Scaling: x = value / reference, with one reference value per parameter (e.g. the starting
 * model's mean, {@link referenceValues}), so every component of x is O(1) whatever the unit and
 * magnitude (Vs ~ 10² m/s, ρ ~ 10³ kg/m³). Without it one step length would mean very different
 * relative changes per parameter and the optimiser's first step and γ scaling would favour the
 * parameter with the largest numbers (common practice; Nocedal & Wright 2006 §2.2 on scaling).
 * The chain rule gives ∂J/∂x = reference · ∂J/∂value. The reference values must be stored with the
 * optimiser state, since x means nothing without them.
 */

/** The parameters the inversion updates. */
export type InvertedParameters = "vs" | "vs-vp" | "vs-vp-rho";

export const INVERTED_PARAMETER_SETS: readonly InvertedParameters[] = ["vs", "vs-vp", "vs-vp-rho"] as const;

/** The model fields on their grid (an ElasticModel fits). */
export interface ModelFields {
  nx: number;
  nz: number;
  /** P velocity, m/s, `[z][x]`. */
  vp: Float32Array;
  /** S velocity, m/s, `[z][x]`. */
  vs: Float32Array;
  /** Density, kg/m³, `[z][x]`. */
  rho: Float32Array;
}

/** Reference values that scale each parameter to O(1). */
export interface ReferenceValues {
  vsMps: number;
  vpMps: number;
  rhoKgm3: number;
}

/** Per-parameter gradients ∂J/∂value `[z][x]` (units of J per m/s or per kg/m³). */
export interface ModelGradients {
  vs?: Float32Array | Float64Array;
  vp?: Float32Array | Float64Array;
  rho?: Float32Array | Float64Array;
}

type Name = "vs" | "vp" | "rho";

/** The parameters of a set, in the order of their blocks in x. */
export function parameterNames(set: InvertedParameters): readonly Name[] {
  if (set === "vs") return ["vs"];
  if (set === "vs-vp") return ["vs", "vp"];
  if (set === "vs-vp-rho") return ["vs", "vp", "rho"];
  throw new RangeError(`parameter set must be one of ${INVERTED_PARAMETER_SETS.join(", ")}, got ${String(set)}`);
}

function reference(ref: ReferenceValues, name: Name): number {
  const v = name === "vs" ? ref.vsMps : name === "vp" ? ref.vpMps : ref.rhoKgm3;
  if (!(v > 0 && Number.isFinite(v))) throw new RangeError(`reference ${name === "vs" ? "vsMps" : name === "vp" ? "vpMps" : "rhoKgm3"} must be a positive number, got ${v}`);
  return v;
}

export function assertModelFields(model: ModelFields): number {
  const n = model.nx * model.nz;
  if (!Number.isInteger(model.nx) || model.nx < 1 || !Number.isInteger(model.nz) || model.nz < 1) throw new RangeError(`nx and nz must be whole numbers ≥ 1, got ${model.nx} and ${model.nz}`);
  for (const name of ["vp", "vs", "rho"] as const) if (model[name].length !== n) throw new RangeError(`${name} must hold nx·nz = ${n} values, got ${model[name].length}`);
  return n;
}

/** Mean of each field: a natural reference (Vs, Vp, ρ of the starting model). */
export function referenceValues(model: ModelFields): ReferenceValues {
  const n = assertModelFields(model);
  const mean = (a: Float32Array) => {
    let s = 0;
    for (let i = 0; i < n; i++) s += a[i];
    return s / n;
  };
  return { vsMps: mean(model.vs), vpMps: mean(model.vp), rhoKgm3: mean(model.rho) };
}

/** The optimiser vector x of `model` for `set` (see the module comment). */
export function modelToVector(model: ModelFields, set: InvertedParameters, ref: ReferenceValues): Float64Array {
  const n = assertModelFields(model);
  const names = parameterNames(set);
  const x = new Float64Array(names.length * n);
  names.forEach((name, b) => {
    const r = reference(ref, name);
    const field = model[name];
    for (let i = 0; i < n; i++) x[b * n + i] = field[i] / r;
  });
  return x;
}

/**
 * The model of vector x: inverted parameters from x (value = x · reference, rounded to float32),
 * the others copied from `base`. Returns new arrays.
 */
export function vectorToModel(x: Float64Array, set: InvertedParameters, ref: ReferenceValues, base: ModelFields): { vp: Float32Array; vs: Float32Array; rho: Float32Array } {
  const n = assertModelFields(base);
  const names = parameterNames(set);
  if (x.length !== names.length * n) throw new RangeError(`x must hold ${names.length}·${n} = ${names.length * n} values for "${set}", got ${x.length}`);
  const out = { vp: new Float32Array(base.vp), vs: new Float32Array(base.vs), rho: new Float32Array(base.rho) };
  names.forEach((name, b) => {
    const r = reference(ref, name);
    const field = out[name];
    for (let i = 0; i < n; i++) field[i] = x[b * n + i] * r;
  });
  return out;
}

/** ∂J/∂x from per-parameter gradients ∂J/∂value (chain rule: ∂J/∂x = reference · ∂J/∂value). */
export function gradientToVector(gradients: ModelGradients, set: InvertedParameters, ref: ReferenceValues, cellCount: number): Float64Array {
  const names = parameterNames(set);
  const g = new Float64Array(names.length * cellCount);
  names.forEach((name, b) => {
    const field = gradients[name];
    if (!field) throw new RangeError(`gradients.${name} is needed for "${set}"`);
    if (field.length !== cellCount) throw new RangeError(`gradients.${name} must hold ${cellCount} values, got ${field.length}`);
    const r = reference(ref, name);
    for (let i = 0; i < cellCount; i++) g[b * cellCount + i] = r * field[i];
  });
  return g;
}

/** Per-parameter gradients ∂J/∂value from ∂J/∂x (for display): ∂J/∂value = (∂J/∂x) / reference. */
export function vectorToGradients(g: Float64Array, set: InvertedParameters, ref: ReferenceValues, cellCount: number): ModelGradients {
  const names = parameterNames(set);
  if (g.length !== names.length * cellCount) throw new RangeError(`g must hold ${names.length * cellCount} values for "${set}", got ${g.length}`);
  const out: ModelGradients = {};
  names.forEach((name, b) => {
    const r = reference(ref, name);
    const field = new Float64Array(cellCount);
    for (let i = 0; i < cellCount; i++) field[i] = g[b * cellCount + i] / r;
    out[name] = field;
  });
  return out;
}
