// Image distances for perceptual path length along a direction (METHODS §1.5). With no learned
// perceptual weights available offline, the default is an SSIM-based distance (1 − SSIM, which
// grows quadratically for small steps, hence exponent 2); mean CIEDE2000 grows linearly
// (exponent 1); mean squared difference is quadratic (exponent 2) and has an analytic value for
// linear generators, which the tests use.
import { ciede2000, linearRgbToLab, srgbDecode } from '../color.ts';
import { ssim } from '../ssim.ts';

export type PathDistance = 'ssim' | 'ciede2000' | 'l2';

export const DISTANCE_EXPONENT: Record<PathDistance, number> = { ssim: 2, ciede2000: 1, l2: 2 };

/** Images are compared at this size at most (box-averaged), as PPL implementations downsample to 256. */
const COMPARE_SIZE = 64;

export interface ImageLayout {
  height: number;
  width: number;
  layout: 'NCHW' | 'NHWC';
  range: [number, number];
}

function channel(values: Float32Array, i: number, c: number, y: number, x: number, g: ImageLayout): number {
  const plane = g.height * g.width;
  return g.layout === 'NCHW' ? values[i * 3 * plane + c * plane + y * g.width + x] : values[(i * plane + y * g.width + x) * 3 + c];
}

/** Box-downsampled RGB of image i, in [0, 1]. */
function downsampledRgb(values: Float32Array, i: number, g: ImageLayout): { rgb: Float64Array; w: number; h: number } {
  const f = Math.max(1, Math.floor(Math.max(g.width, g.height) / COMPARE_SIZE));
  const w = Math.floor(g.width / f);
  const h = Math.floor(g.height / f);
  const rgb = new Float64Array(w * h * 3);
  const [lo, hi] = g.range;
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++)
      for (let c = 0; c < 3; c++) {
        let s = 0;
        for (let dy = 0; dy < f; dy++) for (let dx = 0; dx < f; dx++) s += channel(values, i, c, y * f + dy, x * f + dx, g);
        rgb[(y * w + x) * 3 + c] = (s / (f * f) - lo) / (hi - lo);
      }
  return { rgb, w, h };
}

export function imageDistance(kind: PathDistance, a: Float32Array, ia: number, b: Float32Array, ib: number, g: ImageLayout): number {
  if (kind === 'l2') {
    const n = 3 * g.height * g.width;
    let s = 0;
    for (let k = 0; k < n; k++) {
      const d = a[ia * n + k] - b[ib * n + k];
      s += d * d;
    }
    return s / n;
  }
  const A = downsampledRgb(a, ia, g);
  const B = downsampledRgb(b, ib, g);
  const n = A.w * A.h;
  if (kind === 'ssim') {
    const la = new Float64Array(n);
    const lb = new Float64Array(n);
    for (let p = 0; p < n; p++) {
      la[p] = 0.299 * A.rgb[p * 3] + 0.587 * A.rgb[p * 3 + 1] + 0.114 * A.rgb[p * 3 + 2];
      lb[p] = 0.299 * B.rgb[p * 3] + 0.587 * B.rgb[p * 3 + 1] + 0.114 * B.rgb[p * 3 + 2];
    }
    return 1 - ssim(la, lb, A.w, A.h, { dynamicRange: 1 });
  }
  let s = 0;
  const clamp = (v: number) => srgbDecode(Math.min(1, Math.max(0, v)));
  for (let p = 0; p < n; p++) {
    const la = linearRgbToLab(clamp(A.rgb[p * 3]), clamp(A.rgb[p * 3 + 1]), clamp(A.rgb[p * 3 + 2]));
    const lb = linearRgbToLab(clamp(B.rgb[p * 3]), clamp(B.rgb[p * 3 + 1]), clamp(B.rgb[p * 3 + 2]));
    s += ciede2000(la, lb);
  }
  return s / n;
}
