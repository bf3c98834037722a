// Built-in image measures, each with its unit and range. All work on the 8-bit sRGB image that
// production would see. A soft foreground mask separates the subject from the background: the
// background colour is the median CIELAB colour of the one-pixel border, and a pixel's subject
// weight rises smoothly with its ΔE*ab distance from it.
import { SRGB8_TO_LINEAR, linearRgbToLab } from '../color.ts';
import type { RgbaImage } from '../image.ts';

/** Mask midpoint and softness in ΔE*ab (a just-noticeable difference is about 2.3; these pick out a designed subject). */
const MASK_DELTA_E = 12;
const MASK_SOFTNESS = 3;
const MASK_FLOOR = 1 / (1 + Math.exp(MASK_DELTA_E / MASK_SOFTNESS));

export interface MeasureInfo {
  name: string;
  unit: string;
  range: string;
  description: string;
  /** Period for circular measures (differences wrap), e.g. 360 for hue in degrees. */
  period?: number;
}

export const IMAGE_MEASURES: MeasureInfo[] = [
  { name: 'subject_lightness', unit: 'L* (CIELAB, D65)', range: '0–100', description: 'mask-weighted mean lightness of the subject' },
  { name: 'subject_chroma', unit: 'C*ab', range: '0–~130', description: 'mask-weighted mean chroma of the subject' },
  { name: 'subject_hue', unit: 'degrees h_ab', range: '0–360 (circular)', description: 'hue angle of the subject’s mean a*, b*', period: 360 },
  { name: 'background_lightness', unit: 'L* (CIELAB, D65)', range: '0–100', description: 'mean lightness outside the subject' },
  { name: 'background_chroma', unit: 'C*ab', range: '0–~130', description: 'mean chroma outside the subject' },
  { name: 'colourfulness', unit: 'M3 (Hasler & Süsstrunk 2003)', range: '0–~110 (0 grey, 33 moderate, 59 quite, 82 highly)', description: 'colourfulness of the whole image' },
  { name: 'area', unit: 'fraction of the image', range: '0–1', description: 'subject area from the soft mask (m00 / pixels)' },
  { name: 'centroid_x', unit: 'fraction of the width', range: '0–1', description: 'subject centroid, left to right' },
  { name: 'centroid_y', unit: 'fraction of the height', range: '0–1', description: 'subject centroid, top to bottom' },
  { name: 'orientation', unit: 'degrees', range: '−90–90 (circular, period 180)', description: 'principal axis angle from second moments, clockwise on screen', period: 180 },
  { name: 'sharpness', unit: 'variance of the Laplacian (8-bit luma²)', range: '0–~10⁴', description: 'fine detail and edge contrast' },
  { name: 'symmetry', unit: '1 − mean |Y − mirrored Y| / 255', range: '0–1', description: 'left–right mirror symmetry of the luma' },
];

export interface Moments {
  m00: number;
  cx: number;
  cy: number;
  mu20: number;
  mu02: number;
  mu11: number;
  /** degrees, ½·atan2(2μ11, μ20 − μ02); y points down, so positive is clockwise on screen */
  theta: number;
  eccentricity: number;
}

/** Raw and central image moments of a (soft) mask; x = column, y = row. */
export function imageMoments(mask: ArrayLike<number>, width: number, height: number): Moments {
  let m00 = 0;
  let m10 = 0;
  let m01 = 0;
  for (let y = 0; y < height; y++)
    for (let x = 0; x < width; x++) {
      const v = mask[y * width + x];
      m00 += v;
      m10 += x * v;
      m01 += y * v;
    }
  const cx = m10 / m00;
  const cy = m01 / m00;
  let mu20 = 0;
  let mu02 = 0;
  let mu11 = 0;
  for (let y = 0; y < height; y++)
    for (let x = 0; x < width; x++) {
      const v = mask[y * width + x];
      mu20 += (x - cx) ** 2 * v;
      mu02 += (y - cy) ** 2 * v;
      mu11 += (x - cx) * (y - cy) * v;
    }
  const theta = (0.5 * Math.atan2(2 * mu11, mu20 - mu02) * 180) / Math.PI;
  const root = Math.sqrt(4 * mu11 * mu11 + (mu20 - mu02) ** 2);
  const lp = (mu20 + mu02 + root) / (2 * m00);
  const lm = (mu20 + mu02 - root) / (2 * m00);
  return { m00, cx, cy, mu20, mu02, mu11, theta, eccentricity: lp > 0 ? Math.sqrt(Math.max(0, 1 - lm / lp)) : 0 };
}

/** Colourfulness M3 of Hasler & Süsstrunk (2003) on 8-bit RGB, population standard deviations. */
export function colourfulness(img: RgbaImage): number {
  const n = img.width * img.height;
  let srg = 0;
  let syb = 0;
  let srg2 = 0;
  let syb2 = 0;
  for (let p = 0; p < n; p++) {
    const r = img.data[p * 4];
    const g = img.data[p * 4 + 1];
    const b = img.data[p * 4 + 2];
    const rg = r - g;
    const yb = 0.5 * (r + g) - b;
    srg += rg;
    syb += yb;
    srg2 += rg * rg;
    syb2 += yb * yb;
  }
  const mrg = srg / n;
  const myb = syb / n;
  const vrg = Math.max(0, srg2 / n - mrg * mrg);
  const vyb = Math.max(0, syb2 / n - myb * myb);
  return Math.sqrt(vrg + vyb) + 0.3 * Math.sqrt(mrg * mrg + myb * myb);
}

/** Rec. 601 luma of 8-bit RGB (equals the grey value for R = G = B). */
export function luma(img: RgbaImage): Float64Array {
  const n = img.width * img.height;
  const y = new Float64Array(n);
  for (let p = 0; p < n; p++) y[p] = 0.299 * img.data[p * 4] + 0.587 * img.data[p * 4 + 1] + 0.114 * img.data[p * 4 + 2];
  return y;
}

/**
 * Variance (population) of the 4-neighbour Laplacian [[0,1,0],[1,−4,1],[0,1,0]].
 * border 'reflect101' mirrors without repeating the edge (OpenCV's default); 'interior' skips it.
 */
export function laplacianVariance(gray: ArrayLike<number>, width: number, height: number, border: 'reflect101' | 'interior' = 'reflect101'): number {
  const at = (x: number, y: number) => {
    const xx = x < 0 ? -x : x >= width ? 2 * width - 2 - x : x;
    const yy = y < 0 ? -y : y >= height ? 2 * height - 2 - y : y;
    return gray[yy * width + xx];
  };
  const lo = border === 'interior' ? 1 : 0;
  let s = 0;
  let s2 = 0;
  let n = 0;
  for (let y = lo; y < height - lo; y++)
    for (let x = lo; x < width - lo; x++) {
      const v = at(x, y - 1) + at(x - 1, y) + at(x + 1, y) + at(x, y + 1) - 4 * at(x, y);
      s += v;
      s2 += v * v;
      n++;
    }
  const m = s / n;
  return s2 / n - m * m;
}

function median(xs: Float64Array | number[]): number {
  const a = Float64Array.from(xs).sort();
  const mid = a.length >> 1;
  return a.length % 2 ? a[mid] : (a[mid - 1] + a[mid]) / 2;
}

/** Every built-in measure of one image, in IMAGE_MEASURES order. */
export function measureImage(img: RgbaImage): Float64Array {
  const { width: w, height: h, data } = img;
  const n = w * h;
  const L = new Float64Array(n);
  const A = new Float64Array(n);
  const B = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    const lab = linearRgbToLab(SRGB8_TO_LINEAR[data[p * 4]], SRGB8_TO_LINEAR[data[p * 4 + 1]], SRGB8_TO_LINEAR[data[p * 4 + 2]]);
    L[p] = lab[0];
    A[p] = lab[1];
    B[p] = lab[2];
  }
  const border: number[] = [];
  for (let x = 0; x < w; x++) border.push(x, (h - 1) * w + x);
  for (let y = 1; y < h - 1; y++) border.push(y * w, y * w + w - 1);
  const bL = median(border.map((p) => L[p]));
  const bA = median(border.map((p) => A[p]));
  const bB = median(border.map((p) => B[p]));
  const mask = new Float64Array(n);
  let sw = 0;
  let sL = 0;
  let sA = 0;
  let sB = 0;
  let sC = 0;
  let bw = 0;
  let bgL = 0;
  let bgC = 0;
  for (let p = 0; p < n; p++) {
    const dE = Math.hypot(L[p] - bL, A[p] - bA, B[p] - bB);
    // A logistic ramp in ΔE, shifted so the background colour itself weighs exactly 0.
    const m = Math.max(0, (1 / (1 + Math.exp(-(dE - MASK_DELTA_E) / MASK_SOFTNESS)) - MASK_FLOOR) / (1 - MASK_FLOOR));
    mask[p] = m;
    const c = Math.hypot(A[p], B[p]);
    sw += m;
    sL += m * L[p];
    sA += m * A[p];
    sB += m * B[p];
    sC += m * c;
    bw += 1 - m;
    bgL += (1 - m) * L[p];
    bgC += (1 - m) * c;
  }
  const mo = imageMoments(mask, w, h);
  const Y = luma(img);
  let asym = 0;
  for (let y = 0; y < h; y++) for (let x = 0; x < w; x++) asym += Math.abs(Y[y * w + x] - Y[y * w + (w - 1 - x)]);
  const hue = (Math.atan2(sB, sA) * 180) / Math.PI;
  const safe = (num: number, den: number, fallback: number) => (den > 1e-9 ? num / den : fallback);
  return Float64Array.from([
    safe(sL, sw, bL),
    safe(sC, sw, 0),
    hue < 0 ? hue + 360 : hue,
    safe(bgL, bw, bL),
    safe(bgC, bw, 0),
    colourfulness(img),
    sw / n,
    sw > 1e-9 ? (mo.cx + 0.5) / w : 0.5,
    sw > 1e-9 ? (mo.cy + 0.5) / h : 0.5,
    sw > 1e-9 ? mo.theta : 0,
    laplacianVariance(Y, w, h),
    1 - asym / n / 255,
  ]);
}
