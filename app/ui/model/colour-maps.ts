/**
 * Colour maps for sections: a sequential map from dark blue through teal and green to pale
 * yellow (low velocity dark, so soft ground stands out), and a diverging map for wavefields.
 * Built by linear interpolation between a few anchor colours of our own choice.
 */

const SEQUENTIAL_ANCHORS: Array<[number, number, number]> = [
  [38, 24, 84],
  [44, 79, 140],
  [33, 131, 141],
  [64, 176, 110],
  [172, 206, 76],
  [250, 232, 150],
];

const DIVERGING_ANCHORS: Array<[number, number, number]> = [
  [31, 95, 139],
  [160, 196, 220],
  [255, 255, 255],
  [240, 180, 160],
  [176, 58, 46],
];

function build(anchors: Array<[number, number, number]>): Uint32Array {
  const lut = new Uint32Array(256);
  for (let i = 0; i < 256; i++) {
    const f = (i / 255) * (anchors.length - 1);
    const k = Math.min(anchors.length - 2, Math.floor(f));
    const u = f - k;
    const [r0, g0, b0] = anchors[k];
    const [r1, g1, b1] = anchors[k + 1];
    const r = Math.round(r0 + (r1 - r0) * u);
    const g = Math.round(g0 + (g1 - g0) * u);
    const b = Math.round(b0 + (b1 - b0) * u);
    lut[i] = (255 << 24) | (b << 16) | (g << 8) | r;
  }
  return lut;
}

export const SEQUENTIAL = build(SEQUENTIAL_ANCHORS);
export const DIVERGING = build(DIVERGING_ANCHORS);

/** CSS colour of LUT entry i. */
export function lutCss(lut: Uint32Array, i: number): string {
  const v = lut[Math.max(0, Math.min(255, Math.round(i)))];
  return `rgb(${v & 255},${(v >>> 8) & 255},${(v >>> 16) & 255})`;
}

/** Paints a `[z][x]` grid into an ImageData-sized canvas (one pixel per cell), values mapped from [lo, hi]. */
export function gridToCanvas(values: Float32Array, nx: number, nz: number, lo: number, hi: number, lut: Uint32Array): HTMLCanvasElement {
  const off = document.createElement("canvas");
  off.width = nx;
  off.height = nz;
  const ctx = off.getContext("2d")!;
  const image = ctx.createImageData(nx, nz);
  const px = new Uint32Array(image.data.buffer);
  const k = 255 / (hi - lo || 1);
  for (let i = 0; i < nx * nz; i++) {
    let c = (values[i] - lo) * k;
    c = c < 0 ? 0 : c > 255 ? 255 : c;
    px[i] = lut[c | 0];
  }
  ctx.putImageData(image, 0, 0);
  return off;
}
