// How far a generated image is from a reference image: the objective that `locate` minimises,
// and the figures its report gives. All on float images (sRGB-encoded values in [0, 1]); nothing
// is rounded to 8 bits.
//
// Search distance (cheap enough to run thousands of times, on images box-averaged to at most
// COMPARE_SIZE px on the long side):
//   D = (1 − SSIM_ms) + ΔE00_mean / DELTA_E_SCALE + RMS_low + PRIOR_WEIGHT · d_M² / n
//   - SSIM_ms: colour SSIM (Wang et al. 2004, K1 = 0.01, K2 = 0.03, L = 1, 11×11 Gaussian σ = 1.5,
//     the mean of the R, G and B maps) averaged over the scales COMPARE_SIZE, /2, /4 (each a 2×2
//     box average of the one before) — structure at several sizes, so the search is pulled toward
//     the layout before the fine detail is right.
//   - ΔE00_mean: mean CIEDE2000 (Sharma, Wu & Dalal 2005) per pixel at half the compare size
//     (colour varies slowly; at full compare size the per-pixel trigonometry costs more than the
//     generator's own run on small models).
//   - RMS_low: root-mean-square difference of the LOW_SIZE-px versions — coarse colour and layout,
//     which stays informative when a candidate is so far off that SSIM is flat.
//   Weights: each term is scaled so that it is 0.05 at the acceptance thresholds used by the
//   known-answer test and the report (SSIM 0.95, mean ΔE00 2 → 2/40, an RMS of 0.05 ≈ 13 codes
//   of 255), so at the boundary of "found" no single term dominates.
//   - Prior: d_M is the Mahalanobis distance of w from the truncation centre under the covariance
//     of the generator's own W samples; for a typical w, d_M² ≈ n, so the term is ≈ PRIOR_WEIGHT —
//     a tie-breaker toward on-distribution codes, not a pull that could spoil a good match.
//
// Report figures (computed once, on the best candidate, at the generator's full resolution):
// colour SSIM (single scale, the same definition) and mean ΔE00.
import { linearRgbToLab, ciede2000, srgbDecode, type Lab } from '../color.ts';
import type { FloatImage } from '../reference-image.ts';

export const COMPARE_SIZE = 64;
export const LOW_SIZE = 8;
export const DELTA_E_SCALE = 40;
export const PRIOR_WEIGHT = 0.005;
/** Acceptance thresholds: a match at or beyond both is reported as found. */
export const FOUND_SSIM = 0.95;
export const FOUND_DELTA_E = 2;

const WINDOW = 11;
const SIGMA = 1.5;
const C1 = 0.01 ** 2;
const C2 = 0.03 ** 2;
const KERNEL = (() => {
  const c = (WINDOW - 1) / 2;
  const k = Float64Array.from({ length: WINDOW }, (_, i) => Math.exp(-((i - c) ** 2) / (2 * SIGMA * SIGMA)));
  const s = k.reduce((a, b) => a + b, 0);
  return k.map((v) => v / s);
})();

/** Planar float image [3, h, w]. */
interface Planes {
  w: number;
  h: number;
  data: Float32Array;
}

/** Interleaved [h, w, 3] → planar [3, h, w]. */
function toPlanes(img: FloatImage): Planes {
  const n = img.width * img.height;
  const out = new Float32Array(n * 3);
  for (let p = 0; p < n; p++) for (let c = 0; c < 3; c++) out[c * n + p] = img.data[p * 3 + c];
  return { w: img.width, h: img.height, data: out };
}

/** Box average by an integer factor (drops a ragged edge). */
function boxDown(img: Planes, f: number): Planes {
  if (f <= 1) return img;
  const w = Math.floor(img.w / f);
  const h = Math.floor(img.h / f);
  const out = new Float32Array(w * h * 3);
  const inv = 1 / (f * f);
  for (let c = 0; c < 3; c++) {
    const src = c * img.w * img.h;
    const dst = c * w * h;
    for (let y = 0; y < h; y++)
      for (let x = 0; x < w; x++) {
        let s = 0;
        for (let dy = 0; dy < f; dy++) {
          const row = src + (y * f + dy) * img.w + x * f;
          for (let dx = 0; dx < f; dx++) s += img.data[row + dx];
        }
        out[dst + y * w + x] = s * inv;
      }
  }
  return { w, h, data: out };
}

/** Separable Gaussian 'valid' filter of one plane; writes into out (ow × oh). */
function filterPlane(src: Float32Array, offset: number, w: number, h: number, tmp: Float64Array, out: Float64Array): void {
  const ow = w - WINDOW + 1;
  const oh = h - WINDOW + 1;
  for (let y = 0; y < h; y++) {
    const row = offset + y * w;
    for (let x = 0; x < ow; x++) {
      let s = 0;
      for (let i = 0; i < WINDOW; i++) s += KERNEL[i] * src[row + x + i];
      tmp[y * ow + x] = s;
    }
  }
  for (let y = 0; y < oh; y++)
    for (let x = 0; x < ow; x++) {
      let s = 0;
      for (let i = 0; i < WINDOW; i++) s += KERNEL[i] * tmp[(y + i) * ow + x];
      out[y * ow + x] = s;
    }
}

/** The reference's side of SSIM at one scale: per-channel means and variances, precomputed once. */
interface ScaleStats {
  w: number;
  h: number;
  ref: Planes;
  mu: Float64Array[];
  variance: Float64Array[];
}

function scaleStats(ref: Planes): ScaleStats {
  const { w, h } = ref;
  const ow = w - WINDOW + 1;
  const oh = h - WINDOW + 1;
  const n = w * h;
  const tmp = new Float64Array(ow * h);
  const mu: Float64Array[] = [];
  const variance: Float64Array[] = [];
  const sq = new Float32Array(n);
  for (let c = 0; c < 3; c++) {
    const m = new Float64Array(ow * oh);
    filterPlane(ref.data, c * n, w, h, tmp, m);
    for (let i = 0; i < n; i++) sq[i] = ref.data[c * n + i] ** 2;
    const s = new Float64Array(ow * oh);
    filterPlane(sq, 0, w, h, tmp, s);
    for (let i = 0; i < s.length; i++) s[i] -= m[i] * m[i];
    mu.push(m);
    variance.push(s);
  }
  return { w, h, ref, mu, variance };
}

/**
 * Colour SSIM of a candidate against precomputed reference statistics. The three filtered
 * signals a candidate needs per channel (b, b², a·b) are filtered together in one pass each way.
 */
function ssimAgainst(stats: ScaleStats, img: Planes, scratch: Scratch): number {
  const { w, h } = stats;
  const n = w * h;
  const ow = w - WINDOW + 1;
  const oh = h - WINDOW + 1;
  const size = ow * oh;
  const { t1, t2, t3 } = scratch.for(w, h);
  const b = img.data;
  const a = stats.ref.data;
  let total = 0;
  for (let c = 0; c < 3; c++) {
    const off = c * n;
    for (let y = 0; y < h; y++) {
      const row = off + y * w;
      for (let x = 0; x < ow; x++) {
        let s1 = 0;
        let s2 = 0;
        let s3 = 0;
        for (let i = 0; i < WINDOW; i++) {
          const k = KERNEL[i];
          const bv = b[row + x + i];
          const kb = k * bv;
          s1 += kb;
          s2 += kb * bv;
          s3 += kb * a[row + x + i];
        }
        const o = y * ow + x;
        t1[o] = s1;
        t2[o] = s2;
        t3[o] = s3;
      }
    }
    const ma = stats.mu[c];
    const va = stats.variance[c];
    for (let y = 0; y < oh; y++)
      for (let x = 0; x < ow; x++) {
        let mb = 0;
        let sbb = 0;
        let sab = 0;
        for (let i = 0; i < WINDOW; i++) {
          const k = KERNEL[i];
          const o = (y + i) * ow + x;
          mb += k * t1[o];
          sbb += k * t2[o];
          sab += k * t3[o];
        }
        const o = y * ow + x;
        const am = ma[o];
        const vb = sbb - mb * mb;
        const cov = sab - am * mb;
        total += ((2 * am * mb + C1) * (2 * cov + C2)) / ((am * am + mb * mb + C1) * (va[o] + vb + C2));
      }
  }
  return total / (3 * size);
}

class Scratch {
  #cache = new Map<number, { t1: Float64Array; t2: Float64Array; t3: Float64Array }>();
  for(w: number, h: number) {
    const key = w * 100003 + h;
    let s = this.#cache.get(key);
    if (!s) {
      const ow = w - WINDOW + 1;
      s = { t1: new Float64Array(ow * h), t2: new Float64Array(ow * h), t3: new Float64Array(ow * h) };
      this.#cache.set(key, s);
    }
    return s;
  }
}

/** Lab of every pixel of a planar sRGB image. */
function labPlanes(img: Planes): Float64Array {
  const n = img.w * img.h;
  const out = new Float64Array(n * 3);
  for (let p = 0; p < n; p++) {
    const lab = linearRgbToLab(decode(img.data[p]), decode(img.data[n + p]), decode(img.data[2 * n + p]));
    out[p * 3] = lab[0];
    out[p * 3 + 1] = lab[1];
    out[p * 3 + 2] = lab[2];
  }
  return out;
}

const decode = (v: number) => srgbDecode(v < 0 ? 0 : v > 1 ? 1 : v);

function meanDeltaE(refLab: Float64Array, img: Planes): number {
  const lab = labPlanes(img);
  const n = img.w * img.h;
  let s = 0;
  const a: Lab = [0, 0, 0];
  const b: Lab = [0, 0, 0];
  for (let p = 0; p < n; p++) {
    a[0] = refLab[p * 3];
    a[1] = refLab[p * 3 + 1];
    a[2] = refLab[p * 3 + 2];
    b[0] = lab[p * 3];
    b[1] = lab[p * 3 + 1];
    b[2] = lab[p * 3 + 2];
    s += ciede2000(a, b);
  }
  return s / n;
}

/** Generator output (NCHW or NHWC, values in `range`) → planar sRGB [0, 1] of image `index`. */
export function outputToPlanes(values: Float32Array, index: number, width: number, height: number, layout: 'NCHW' | 'NHWC', range: [number, number]): Planes {
  const n = width * height;
  const out = new Float32Array(n * 3);
  const lo = range[0];
  const scale = 1 / (range[1] - range[0]);
  const base = index * n * 3;
  if (layout === 'NCHW') for (let i = 0; i < n * 3; i++) out[i] = clamp01((values[base + i] - lo) * scale);
  else for (let p = 0; p < n; p++) for (let c = 0; c < 3; c++) out[c * n + p] = clamp01((values[base + p * 3 + c] - lo) * scale);
  return { w: width, h: height, data: out };
}

const clamp01 = (v: number) => (v < 0 ? 0 : v > 1 ? 1 : v);

export interface MatchTerms {
  ssim: number;
  deltaE: number;
  rmsLow: number;
  /** The three image terms combined, without the prior. */
  distance: number;
}

/**
 * The reference, prepared once: its pyramid, SSIM statistics and Lab values at the compare size.
 * `distance` then costs three filtered planes per channel per scale and one ΔE00 per pixel.
 */
export class MatchTarget {
  readonly width: number;
  readonly height: number;
  readonly #factor: number;
  readonly #scales: ScaleStats[];
  readonly #lab: Float64Array;
  readonly #labLevel: number;
  readonly #low: Planes;
  readonly #lowFactor: number;
  readonly #full: Planes;
  readonly #scratch = new Scratch();

  constructor(reference: FloatImage) {
    this.width = reference.width;
    this.height = reference.height;
    this.#full = toPlanes(reference);
    this.#factor = Math.max(1, Math.floor(Math.max(reference.width, reference.height) / COMPARE_SIZE));
    const base = boxDown(this.#full, this.#factor);
    this.#scales = [];
    let level = base;
    for (let s = 0; s < 3 && Math.min(level.w, level.h) >= 2 * WINDOW - 6; s++) {
      this.#scales.push(scaleStats(level));
      level = boxDown(level, 2);
    }
    if (this.#scales.length === 0) throw new RangeError(`images of ${reference.width} × ${reference.height} are too small to compare (SSIM needs at least ${WINDOW} px)`);
    this.#labLevel = this.#scales.length > 1 ? 1 : 0;
    this.#lab = labPlanes(this.#scales[this.#labLevel].ref);
    this.#lowFactor = Math.max(1, Math.floor(Math.max(reference.width, reference.height) / LOW_SIZE));
    this.#low = boxDown(this.#full, this.#lowFactor);
  }

  /** The search distance's image terms for one candidate at full size (planar sRGB [0, 1]). */
  terms(candidate: Planes): MatchTerms {
    if (candidate.w !== this.width || candidate.h !== this.height) throw new RangeError(`candidate is ${candidate.w} × ${candidate.h}, reference ${this.width} × ${this.height}`);
    let level = boxDown(candidate, this.#factor);
    let deltaE = 0;
    let ssimSum = 0;
    for (let s = 0; s < this.#scales.length; s++) {
      if (s > 0) level = boxDown(level, 2);
      if (s === this.#labLevel) deltaE = meanDeltaE(this.#lab, level);
      ssimSum += ssimAgainst(this.#scales[s], level, this.#scratch);
    }
    const ssim = ssimSum / this.#scales.length;
    const low = boxDown(candidate, this.#lowFactor);
    let sq = 0;
    for (let i = 0; i < low.data.length; i++) sq += (low.data[i] - this.#low.data[i]) ** 2;
    const rmsLow = Math.sqrt(sq / low.data.length);
    return { ssim, deltaE, rmsLow, distance: 1 - ssim + deltaE / DELTA_E_SCALE + rmsLow };
  }

  /** Report figures at full resolution: colour SSIM (single scale) and mean ΔE00. */
  report(candidate: Planes): { ssim: number; deltaE: number } {
    const stats = scaleStats(this.#full);
    const ssim = ssimAgainst(stats, candidate, new Scratch());
    const deltaE = meanDeltaE(labPlanes(this.#full), candidate);
    return { ssim, deltaE };
  }
}

/** Full-resolution colour SSIM and mean ΔE00 of two interleaved float images (for reports and tests). */
export function matchFigures(reference: FloatImage, candidate: FloatImage): { ssim: number; deltaE: number } {
  return new MatchTarget(reference).report(toPlanes(candidate));
}

export { toPlanes, type Planes };

/** ΔE00 at which the difference image saturates to white (10 is a clearly visible difference). */
export const DIFFERENCE_FULL_SCALE = 10;

/**
 * A difference image for people: per-pixel CIEDE2000 between two same-size images (interleaved
 * float sRGB), drawn as grey from black (0) to white (DIFFERENCE_FULL_SCALE or more), RGBA8.
 */
export function differenceImage(a: FloatImage, b: FloatImage): { width: number; height: number; data: Uint8ClampedArray } {
  if (a.width !== b.width || a.height !== b.height) throw new RangeError(`images differ in size: ${a.width} × ${a.height} and ${b.width} × ${b.height}`);
  const n = a.width * a.height;
  const data = new Uint8ClampedArray(n * 4);
  for (let p = 0; p < n; p++) {
    const la = linearRgbToLab(decode(a.data[p * 3]), decode(a.data[p * 3 + 1]), decode(a.data[p * 3 + 2]));
    const lb = linearRgbToLab(decode(b.data[p * 3]), decode(b.data[p * 3 + 1]), decode(b.data[p * 3 + 2]));
    const v = Math.round((255 * Math.min(DIFFERENCE_FULL_SCALE, ciede2000(la, lb))) / DIFFERENCE_FULL_SCALE);
    data[p * 4] = data[p * 4 + 1] = data[p * 4 + 2] = v;
    data[p * 4 + 3] = 255;
  }
  return { width: a.width, height: a.height, data };
}
