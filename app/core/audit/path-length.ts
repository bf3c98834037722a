// Image distances for perceptual path length along a direction (METHODS §1.5), always on the
// generator's float images (never 8-bit: at small steps quantisation would dominate). With no
// learned perceptual weights available offline, the default is colour-aware: SSIM over the three
// CIELAB channels ('ssim-lab'; 1 − SSIM grows quadratically for small steps, hence exponent 2).
// 'ssim' is brightness-only SSIM on Rec. 601 luma; mean CIEDE2000 grows linearly (exponent 1);
// mean squared difference is quadratic (exponent 2) and has an analytic value for linear
// generators, which the tests use. Also here: the 1st/99th-percentile filter of the published
// PPL code (Karras et al. 2019, METHODS §1.2) and the units each distance reports in.
import { ciede2000, linearRgbToLab, srgbDecode } from '../color.ts';
import { ssim } from '../ssim.ts';
import { percentileSorted } from '../stats.ts';

export type PathDistance = 'ssim-lab' | 'ssim' | 'ciede2000' | 'l2';

/** The default distance: colour-aware (a hue change is seen, unlike luma SSIM's). */
export const DEFAULT_PATH_DISTANCE: PathDistance = 'ssim-lab';

export const DISTANCE_EXPONENT: Record<PathDistance, number> = { 'ssim-lab': 2, ssim: 2, ciede2000: 1, l2: 2 };

/**
 * Images are compared at this size at most (box-averaged by an integer factor, so never below
 * it for images at least this large); PPL implementations downsample to 256 (METHODS §1.2), and
 * 128 keeps fine detail while the JS CIEDE2000 stays affordable.
 */
export const COMPARE_SIZE = 128;

/**
 * Dynamic range of L*, a*, b* for SSIM (its L): L* spans 0–100; a* and b* are taken over the
 * −128…127 span of 8-bit CIELAB encodings (common practice, e.g. ICC and TIFF CIELAB), 255.
 */
export const LAB_RANGE = [100, 255, 255];

/** The published PPL keeps samples between the 1st ('lower') and 99th ('higher') percentile (METHODS §1.2). */
export const PPL_FILTER_PERCENTILES: [number, number] = [1, 99];

/** Units of a path length: distance per σ^p for a step measured in σ of the direction. */
export function pathLengthUnits(distance: PathDistance | 'features', step: 'σ' | 'W' = 'σ'): string {
  const base = { 'ssim-lab': '(1 − SSIM over CIELAB)', ssim: '(1 − SSIM of luma)', ciede2000: 'mean ΔE00', l2: 'mean squared difference (image range units²)', features: 'squared feature distance' }[distance];
  const p = distance === 'features' ? 2 : DISTANCE_EXPONENT[distance];
  const unit = step === 'σ' ? 'σ' : 'unit of W';
  return `${base} per ${unit}${p === 2 ? '²' : ''}`;
}

/**
 * Bounds of the published filter over all samples: [1st percentile with NumPy's method='lower',
 * 99th with method='higher']; samples outside are dropped before the mean.
 */
export function percentileFilterBounds(values: ArrayLike<number>): [number, number] {
  const sorted = Float64Array.from(values).filter(Number.isFinite).sort();
  return [percentileSorted(sorted, PPL_FILTER_PERCENTILES[0], 'lower'), percentileSorted(sorted, PPL_FILTER_PERCENTILES[1], 'higher')];
}

/** Mean of the values within the published 1st/99th-percentile filter, with the count kept. */
export function filteredMean(values: ArrayLike<number>): { mean: number; kept: number; bounds: [number, number] } {
  const bounds = percentileFilterBounds(values);
  let s = 0;
  let kept = 0;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (v >= bounds[0] && v <= bounds[1]) {
      s += v;
      kept++;
    }
  }
  return { mean: kept ? s / kept : NaN, kept, bounds };
}

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
  if (kind === 'ssim-lab') {
    const channels = [0, 1, 2].map(() => [new Float64Array(n), new Float64Array(n)]);
    const clamp = (v: number) => srgbDecode(Math.min(1, Math.max(0, v)));
    for (const [img, side] of [[A, 0], [B, 1]] as const)
      for (let p = 0; p < n; p++) {
        const lab = linearRgbToLab(clamp(img.rgb[p * 3]), clamp(img.rgb[p * 3 + 1]), clamp(img.rgb[p * 3 + 2]));
        for (let c = 0; c < 3; c++) channels[c][side][p] = lab[c] / LAB_RANGE[c];
      }
    return 1 - channels.reduce((acc, [x, y]) => acc + ssim(x, y, A.w, A.h, { dynamicRange: 1 }), 0) / 3;
  }
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

/** ε of the published PPL (Karras et al. 2019; METHODS §1.2), in units of W. */
export const PUBLISHED_PPL_EPSILON = 1e-4;

/**
 * The two codes of one published-form PPL sample in W: lerp(w1, w2; t) and lerp(w1, w2; t + ε)
 * (lerp in W, since W is not spherical; t ≡ 0 for the end-point variant, t ~ U(0, 1) for full paths).
 */
export function lerpPair(w1: ArrayLike<number>, w2: ArrayLike<number>, t: number, epsilon = PUBLISHED_PPL_EPSILON): [Float32Array, Float32Array] {
  const a = new Float32Array(w1.length);
  const b = new Float32Array(w1.length);
  for (let k = 0; k < w1.length; k++) {
    const d = w2[k] - w1[k];
    a[k] = w1[k] + t * d;
    b[k] = w1[k] + (t + epsilon) * d;
  }
  return [a, b];
}
