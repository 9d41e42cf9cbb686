/** Minimal types for the parts of fili 2.0.3 (general-purpose DSP library) the filter tests use. */
declare module "fili" {
  export interface FiliBiquad {
    a: number[];
    b: number[];
    k: number;
    z: number[];
  }
  export interface FiliCascadeParams {
    order: number;
    characteristic: "butterworth" | "bessel";
    Fs: number;
    Fc: number;
    Q?: number;
    BW?: number;
    preGain?: boolean;
  }
  export interface FiliCalcCascades {
    lowpass(p: FiliCascadeParams): FiliBiquad[];
    highpass(p: FiliCascadeParams): FiliBiquad[];
  }
  export interface FiliIirCoeffs {
    bandstop(p: { Fs: number; Fc: number; Q: number; BW?: number }): FiliBiquad;
  }
  export interface FiliIirFilter {
    multiStep(input: number[]): number[];
    responsePoint(p: { Fs: number; Fr: number }): { magnitude: number; phase: number };
    reinit(): void;
  }
  const Fili: {
    CalcCascades: new () => FiliCalcCascades;
    IirCoeffs: new () => FiliIirCoeffs;
    IirFilter: new (cascade: FiliBiquad[]) => FiliIirFilter;
  };
  export default Fili;
}
