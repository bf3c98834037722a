// Subject/background separation for the built-in image measures. Assumes what an emblem, icon or
// character sheet usually is: one subject on a plain or smoothly shaded background that reaches
// the image border. The background is a smooth (quadratic) surface per channel fitted to the
// border and refitted to the pixels it explains; a pixel belongs to the subject when its ΔE*ab
// from the background under it exceeds a stated threshold; of the 8-connected components, the one
// with the most solid pixels is kept and its holes smaller than itself are filled (a gem or an
// inset of another colour is part of the subject). The soft mask gives partial weight to
// anti-aliased edge pixels: their distance from the background in 8-bit sRGB relative to the
// interior's, which is exactly the coverage when a renderer mixes colours by coverage in sRGB
// (the common case), so area and centroid stay smooth under sub-pixel changes and a blur
// conserves the area.
import { SRGB8_TO_LINEAR, linearRgbToLab } from '../color.ts';
import type { RgbaImage } from '../image.ts';
import { median } from '../stats.ts';

/**
 * ΔE*ab above which a pixel counts as subject. A just-noticeable difference is about 2.3 ΔE*ab
 * (Sharma 2003, common practice); 12 is several JNDs, well above the scatter of a rendered plain
 * background and well below the contrast of a designed subject.
 */
export const SUBJECT_DELTA_E = 12;
/** Below this share of the image the largest component is noise, not a subject. */
export const MIN_SUBJECT_SHARE = 0.001;
/** Above this share there is no background left to separate it from. */
export const MAX_SUBJECT_SHARE = 0.9;
/** Interior = subject eroded by this many pixels (away from the anti-aliased edge). */
export const INTERIOR_ERODE = 2;
/** The soft edge is read within this many pixels either side of the thresholded edge (covers blurs up to σ ≈ 1.5 px). */
export const EDGE_REACH = 4;
/** Background = everything outside the subject dilated by this many pixels. */
export const BACKGROUND_DILATE = EDGE_REACH + 1;

export interface LabImage {
  width: number;
  height: number;
  L: Float64Array;
  a: Float64Array;
  b: Float64Array;
}

export interface Subject {
  /** false when no subject separates from the background; `note` says why. */
  found: boolean;
  note: string;
  /** Soft subject weight per pixel, 0…1 (all 0 when not found). */
  mask: Float64Array;
  /** Hard regions: 1 = subject interior, 2 = edge band, 3 = background, 0 = neither. */
  region: Uint8Array;
  /** Background colour estimate (median of the border), L*, a*, b*. */
  border: [number, number, number];
  /** Median sRGB distance (8-bit units) of the subject interior from the background colour. */
  contrast: number;
}

export const REGION_INTERIOR = 1;
export const REGION_EDGE = 2;
export const REGION_BACKGROUND = 3;

/** 8-bit sRGB → CIELAB (D65) per pixel (CIE 15: sRGB decode, XYZ, L*a*b*). */
export function toLab(img: RgbaImage): LabImage {
  const n = img.width * img.height;
  const L = new Float64Array(n);
  const a = new Float64Array(n);
  const b = new Float64Array(n);
  const d = img.data;
  for (let p = 0; p < n; p++) {
    const lab = linearRgbToLab(SRGB8_TO_LINEAR[d[p * 4]], SRGB8_TO_LINEAR[d[p * 4 + 1]], SRGB8_TO_LINEAR[d[p * 4 + 2]]);
    L[p] = lab[0];
    a[p] = lab[1];
    b[p] = lab[2];
  }
  return { width: img.width, height: img.height, L, a, b };
}


/** Median of one channel over the pixels where region[p] === which. */
export function regionMedian(ch: Float64Array, region: Uint8Array, which: number): number {
  let n = 0;
  for (let p = 0; p < region.length; p++) if (region[p] === which) n++;
  const v = new Float64Array(n);
  n = 0;
  for (let p = 0; p < region.length; p++) if (region[p] === which) v[n++] = ch[p];
  return median(v);
}

/** Refits of the background surface to the pixels it explains. */
const BACKGROUND_REFITS = 2;

/**
 * Least-squares quadratic surface c0 + c1·x + c2·y + c3·x² + c4·y² + c5·xy (x, y in [−1, 1])
 * through one channel at the given pixels, evaluated everywhere; a constant (their median) when
 * the fit is ill-posed.
 */
export function fitSurface(ch: ArrayLike<number>, w: number, h: number, at: ArrayLike<number>): Float64Array {
  const basis = (x: number, y: number) => [1, x, y, x * x, y * y, x * y];
  const M = Array.from({ length: 6 }, () => new Float64Array(7));
  for (let i = 0; i < at.length; i++) {
    const p = at[i];
    const x = ((p % w) + 0.5) / w * 2 - 1;
    const y = (Math.floor(p / w) + 0.5) / h * 2 - 1;
    const f = basis(x, y);
    for (let r = 0; r < 6; r++) {
      for (let c = 0; c < 6; c++) M[r][c] += f[r] * f[c];
      M[r][6] += f[r] * ch[p];
    }
  }
  // Gaussian elimination with partial pivoting.
  let ok = true;
  for (let c = 0; c < 6 && ok; c++) {
    let piv = c;
    for (let r = c + 1; r < 6; r++) if (Math.abs(M[r][c]) > Math.abs(M[piv][c])) piv = r;
    if (!(Math.abs(M[piv][c]) > 1e-9 * at.length)) ok = false;
    else {
      [M[c], M[piv]] = [M[piv], M[c]];
      for (let r = 0; r < 6; r++) {
        if (r === c) continue;
        const k = M[r][c] / M[c][c];
        for (let j = c; j < 7; j++) M[r][j] -= k * M[c][j];
      }
    }
  }
  const out = new Float64Array(w * h);
  if (!ok) return out.fill(median(Array.from(at, (p) => ch[p])));
  const coef = M.map((row, r) => row[6] / row[r]);
  for (let yy = 0; yy < h; yy++)
    for (let xx = 0; xx < w; xx++) {
      const f = basis(((xx + 0.5) / w) * 2 - 1, ((yy + 0.5) / h) * 2 - 1);
      let v = 0;
      for (let r = 0; r < 6; r++) v += coef[r] * f[r];
      out[yy * w + xx] = v;
    }
  return out;
}

/** Binary erosion (r > 0) or dilation (r < 0) with a (2|r|+1)² square, separable; outside counts as 0. */
export function morph(mask: Uint8Array, w: number, h: number, r: number): Uint8Array {
  const erode = r > 0;
  const k = Math.abs(r);
  const pass = (src: Uint8Array, horizontal: boolean) => {
    const out = new Uint8Array(src.length);
    for (let y = 0; y < h; y++)
      for (let x = 0; x < w; x++) {
        let v = erode ? 1 : 0;
        for (let t = -k; t <= k; t++) {
          const xx = horizontal ? x + t : x;
          const yy = horizontal ? y : y + t;
          const s = xx < 0 || yy < 0 || xx >= w || yy >= h ? 0 : src[yy * w + xx];
          if (erode ? !s : s) {
            v = erode ? 0 : 1;
            break;
          }
        }
        out[y * w + x] = v;
      }
    return out;
  };
  return k === 0 ? mask.slice() : pass(pass(mask, true), false);
}

/**
 * Chessboard (8-neighbour) distance from each pixel to the nearest pixel whose mask value is
 * `other` (two raster passes, Rosenfeld & Pfaltz 1966); pixels with value `other` have distance 0
 * and, for erosion, the outside of the image counts as `other` === 0.
 */
export function chessboardDistance(mask: Uint8Array, w: number, h: number, other: 0 | 1): Uint16Array {
  const big = 0xffff;
  const dist = new Uint16Array(w * h);
  const outsideIsOther = other === 0;
  for (let p = 0; p < w * h; p++) dist[p] = mask[p] === other ? 0 : big;
  const at = (x: number, y: number) => (x < 0 || y < 0 || x >= w || y >= h ? (outsideIsOther ? 0 : big) : dist[y * w + x]);
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++) {
      const p = y * w + x;
      if (!dist[p]) continue;
      const v = Math.min(at(x - 1, y), at(x - 1, y - 1), at(x, y - 1), at(x + 1, y - 1)) + 1;
      if (v < dist[p]) dist[p] = v;
    }
  for (let y = h - 1; y >= 0; y--)
    for (let x = w - 1; x >= 0; x--) {
      const p = y * w + x;
      if (!dist[p]) continue;
      const v = Math.min(at(x + 1, y), at(x + 1, y + 1), at(x, y + 1), at(x - 1, y + 1)) + 1;
      if (v < dist[p]) dist[p] = v;
    }
  return dist;
}

/**
 * The subject: of the 8-connected components of the thresholded mask, the one with the most
 * "thick" pixels (all four neighbours set), so a thin frame line or outline ring around the image
 * never wins over a solid subject; then its holes smaller than itself are filled (an inset of
 * another colour belongs to the subject; the inside of a frame ring does not).
 */
function largestComponentFilled(hard: Uint8Array, w: number, h: number): { solid: Uint8Array; size: number } {
  const n = w * h;
  const label = new Int32Array(n);
  const queue = new Int32Array(n);
  const set = (x: number, y: number) => x >= 0 && y >= 0 && x < w && y < h && hard[y * w + x] === 1;
  let best = 0;
  let bestThick = -1;
  let bestSize = 0;
  let next = 0;
  for (let s = 0; s < n; s++) {
    if (!hard[s] || label[s]) continue;
    next++;
    let head = 0;
    let tail = 0;
    let thick = 0;
    queue[tail++] = s;
    label[s] = next;
    while (head < tail) {
      const p = queue[head++];
      const x = p % w;
      const y = (p - x) / w;
      if (set(x - 1, y) && set(x + 1, y) && set(x, y - 1) && set(x, y + 1)) thick++;
      for (let dy = -1; dy <= 1; dy++)
        for (let dx = -1; dx <= 1; dx++) {
          const xx = x + dx;
          const yy = y + dy;
          if (xx < 0 || yy < 0 || xx >= w || yy >= h) continue;
          const q = yy * w + xx;
          if (hard[q] && !label[q]) {
            label[q] = next;
            queue[tail++] = q;
          }
        }
    }
    if (thick > bestThick || (thick === bestThick && tail > bestSize)) {
      bestThick = thick;
      bestSize = tail;
      best = next;
    }
  }
  const solid = new Uint8Array(n);
  if (!best) return { solid, size: 0 };
  // Regions outside the component, each flooded (4-connected); those not touching the border are holes.
  const region = new Int32Array(n);
  let size = 0;
  for (let p = 0; p < n; p++) if (label[p] === best) (solid[p] = 1), size++;
  const componentSize = size;
  let r = 0;
  for (let s = 0; s < n; s++) {
    if (solid[s] || region[s]) continue;
    r++;
    let head = 0;
    let tail = 0;
    let touches = false;
    queue[tail++] = s;
    region[s] = r;
    while (head < tail) {
      const p = queue[head++];
      const x = p % w;
      const y = (p - x) / w;
      if (x === 0 || y === 0 || x === w - 1 || y === h - 1) touches = true;
      for (const q of [x > 0 ? p - 1 : -1, x < w - 1 ? p + 1 : -1, y > 0 ? p - w : -1, y < h - 1 ? p + w : -1]) {
        if (q >= 0 && !solid[q] && !region[q]) {
          region[q] = r;
          queue[tail++] = q;
        }
      }
    }
    if (!touches && tail < componentSize) for (let i = 0; i < tail; i++) (solid[queue[i]] = 1), size++;
  }
  return { solid, size };
}

/** Separates the subject from the background of a CIELAB image. */
export function findSubject(lab: LabImage, img: RgbaImage): Subject {
  const { width: w, height: h, L, a, b } = lab;
  const n = w * h;
  const borderIdx: number[] = [];
  for (let x = 0; x < w; x++) borderIdx.push(x, (h - 1) * w + x);
  for (let y = 1; y < h - 1; y++) borderIdx.push(y * w, y * w + w - 1);
  const border: [number, number, number] = [median(borderIdx.map((p) => L[p])), median(borderIdx.map((p) => a[p])), median(borderIdx.map((p) => b[p]))];
  // The background as a smooth surface (quadratic in x, y per CIELAB and sRGB channel): fitted to
  // the border first, then refitted to the pixels it explains, so a vignette or a gentle gradient
  // is background rather than subject. A plain background fits as a constant.
  const rgb = [0, 1, 2].map((k) => Float64Array.from({ length: n }, (_, p) => img.data[p * 4 + k]));
  const channels = [L, a, b, ...rgb];
  let fitted = channels.map((ch) => fitSurface(ch, w, h, borderIdx));
  const dE = new Float64Array(n);
  const hard = new Uint8Array(n);
  const distances = () => {
    for (let p = 0; p < n; p++) dE[p] = Math.hypot(L[p] - fitted[0][p], a[p] - fitted[1][p], b[p] - fitted[2][p]);
  };
  distances();
  for (let round = 0; round < BACKGROUND_REFITS; round++) {
    const quiet: number[] = [];
    for (let p = 0; p < n; p += 3) if (dE[p] < SUBJECT_DELTA_E / 2) quiet.push(p);
    if (quiet.length < borderIdx.length) break;
    fitted = channels.map((ch) => fitSurface(ch, w, h, quiet));
    distances();
  }
  for (let p = 0; p < n; p++) hard[p] = dE[p] > SUBJECT_DELTA_E ? 1 : 0;
  const { solid, size } = largestComponentFilled(hard, w, h);
  const none = (note: string): Subject => {
    const region = new Uint8Array(n).fill(REGION_BACKGROUND);
    return { found: false, note, mask: new Float64Array(n), region, border, contrast: 0 };
  };
  if (size < Math.max(9, MIN_SUBJECT_SHARE * n)) return none(`no subject separates from the background: no region differs from the border colour by more than ΔE*ab ${SUBJECT_DELTA_E} over at least ${(MIN_SUBJECT_SHARE * 100).toFixed(1)}% of the image`);
  if (size > MAX_SUBJECT_SHARE * n) return none(`no subject separates from the background: the region that differs from the border colour covers ${((100 * size) / n).toFixed(0)}% of the image (a subject on a plain background is assumed)`);
  // Erosion / dilation by a (2r+1)² square = thresholds of the chessboard distance to the other side.
  const inDist = chessboardDistance(solid, w, h, 0);
  const outDist = chessboardDistance(solid, w, h, 1);
  const interior = Uint8Array.from(inDist, (v) => (v > INTERIOR_ERODE ? 1 : 0));
  const core = Uint8Array.from(inDist, (v) => (v > EDGE_REACH ? 1 : 0));
  const near = Uint8Array.from(outDist, (v) => (v <= EDGE_REACH ? 1 : 0));
  const outside = Uint8Array.from(outDist, (v) => (v <= BACKGROUND_DILATE ? 1 : 0));
  let interiorCount = 0;
  for (let p = 0; p < n; p++) interiorCount += interior[p];
  const d = img.data;
  const channel = (k: number, which: Uint8Array | null) => {
    if (!which) return median(borderIdx.map((p) => d[p * 4 + k]));
    let count = 0;
    for (let p = 0; p < n; p++) count += which[p];
    const v = new Float64Array(count);
    count = 0;
    for (let p = 0; p < n; p++) if (which[p]) v[count++] = d[p * 4 + k];
    return median(v);
  };
  const fg = [0, 1, 2].map((k) => channel(k, interiorCount >= 5 ? interior : solid));
  // The interior's distance from the background under it (the surface at the interior pixels).
  const sel = interiorCount >= 5 ? interior : solid;
  const bgUnder = [3, 4, 5].map((c) => {
    let count = 0;
    for (let p = 0; p < n; p++) count += sel[p];
    const v = new Float64Array(count);
    count = 0;
    for (let p = 0; p < n; p++) if (sel[p]) v[count++] = fitted[c][p];
    return median(v);
  });
  const contrast = Math.hypot(fg[0] - bgUnder[0], fg[1] - bgUnder[1], fg[2] - bgUnder[2]);
  const mask = new Float64Array(n);
  const region = new Uint8Array(n);
  for (let p = 0; p < n; p++) {
    // Deep inside: full weight. Near the edge: coverage read as the sRGB distance from the
    // background relative to the interior's (exact for coverage mixing in sRGB; clamped at 1 for
    // an outline or inset further from the background than the interior).
    if (core[p]) mask[p] = 1;
    else if (near[p] && contrast > 0) mask[p] = Math.min(1, Math.hypot(d[p * 4] - fitted[3][p], d[p * 4 + 1] - fitted[4][p], d[p * 4 + 2] - fitted[5][p]) / contrast);
    region[p] = interior[p] ? REGION_INTERIOR : !outside[p] ? REGION_BACKGROUND : REGION_EDGE;
  }
  return { found: true, note: '', mask, region, border, contrast };
}
