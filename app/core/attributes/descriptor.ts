// The fixed image descriptor that defined attributes are fitted on: the built-in image measures,
// CIELAB colour histograms of the subject and of the background, and a low-resolution
// histogram of oriented gradients (Dalal & Triggs 2005). "Fixed" means it has no learned part:
// the same image always gives the same vector, so a scorer fitted today can be re-applied later
// as long as its recorded spec still matches (descriptorSpec() says exactly what went in).
//
// The built-in measures come in through a parameter (a MeasureSource), not an import, so this
// file keeps working whatever shape app/core/scorers/ takes; the subject mask here is one small
// function (subjectMask) that can be swapped for the measures' own mask.
import { SRGB8_TO_LINEAR, linearRgbToLab } from '../color.ts';
import type { RgbaImage } from '../image.ts';
import { median } from '../stats.ts';

/**
 * HOG parameters (Dalal & Triggs 2005, "Histograms of Oriented Gradients for Human Detection",
 * CVPR; their best pedestrian setting is 8×8-pixel cells, 2×2-cell blocks with a one-cell stride,
 * 9 unsigned orientation bins over 0–180°, centred [−1, 0, 1] gradients without smoothing, L2-Hys
 * block normalisation with clipping at 0.2). Here the image is first averaged down to 32×32 luma,
 * so the descriptor describes coarse shape and layout (4×4 cells, 3×3 blocks, 324 values), not
 * texture. Votes are split linearly between the two nearest orientation-bin centres; Dalal & Triggs
 * also interpolate spatially between cells, which we do not (each pixel votes into its own cell).
 */
export const HOG = {
  /** The luma image is area-averaged to this many pixels on each side first. */
  size: 32,
  cell: 8,
  bins: 9,
  blockCells: 2,
  /** Block stride in cells. */
  stride: 1,
  /** L2-Hys clip (Dalal & Triggs 2005, after Lowe 2004's SIFT normalisation). */
  clip: 0.2,
  /** ε in v / √(‖v‖² + ε²): keeps flat blocks at zero instead of dividing by zero (scikit-image uses the same 1e-5, from memory). */
  epsilon: 1e-5,
} as const;

export interface HogParams {
  cell: number;
  bins: number;
  blockCells: number;
  stride: number;
  clip: number;
  epsilon: number;
}

/**
 * CIELAB histogram bins per channel and region. Marginal (per-channel) histograms, not a joint 3-D
 * one: with the few dozen tagged examples a lead provides, 8 + 8 + 8 bins can be fitted, 512 cannot.
 * a*, b* beyond ±80 fall into the end bins (sRGB's gamut reaches about ±100, but rarely).
 */
export const COLOUR_HISTOGRAM = {
  bins: 8,
  L: [0, 100] as [number, number],
  a: [-80, 80] as [number, number],
  b: [-80, 80] as [number, number],
  /** ΔE*ab of subject pixels from the subject's own median colour: 8 bins over 0–80 (beyond → last bin). */
  contrast: [0, 80] as [number, number],
} as const;

/**
 * Subject mask for the histograms until the built-in measures provide one: a pixel is subject when
 * its ΔE*ab from the dominant (median) colour exceeds this. 12 is about five just-noticeable
 * differences (a JND is about 2.3 ΔE*ab, Sharma 2003, from memory): a designed subject on a plain
 * ground clears it; anti-aliased edge pixels mostly do not.
 */
export const SUBJECT_DELTA_E = 12;

/** The built-in measures, handed in by the caller (today: IMAGE_MEASURES and measureImage). */
export interface MeasureSource {
  names: string[];
  /** Period of circular measures by index (e.g. 360 for a hue); encoded as cos/sin of the angle. */
  periods: (number | undefined)[];
  measure(img: RgbaImage): ArrayLike<number>;
}

export interface DescriptorSpec {
  version: 1;
  hog: { size: number } & HogParams;
  colourHistogram: { bins: number; L: [number, number]; a: [number, number]; b: [number, number]; contrast: [number, number]; subjectDeltaE: number };
  radialProfile: { bins: number; reach: number };
  /** Measure names in order; circular ones contribute two values (cos, sin). */
  measures: { name: string; period: number | null }[];
  /** Number of values in the descriptor. */
  length: number;
}

export function descriptorSpec(source: MeasureSource): DescriptorSpec {
  const measures = source.names.map((name, i) => ({ name, period: source.periods[i] ?? null }));
  const blocks = HOG.size / HOG.cell - HOG.blockCells + 1;
  const hogLength = blocks * blocks * HOG.blockCells * HOG.blockCells * HOG.bins;
  const colourLength = 8 * COLOUR_HISTOGRAM.bins + 2 * RADIAL_PROFILE.bins;
  const measureLength = measures.reduce((s, m) => s + (m.period ? 2 : 1), 0);
  return {
    version: 1,
    hog: { size: HOG.size, cell: HOG.cell, bins: HOG.bins, blockCells: HOG.blockCells, stride: HOG.stride, clip: HOG.clip, epsilon: HOG.epsilon },
    colourHistogram: { bins: COLOUR_HISTOGRAM.bins, L: COLOUR_HISTOGRAM.L, a: COLOUR_HISTOGRAM.a, b: COLOUR_HISTOGRAM.b, contrast: COLOUR_HISTOGRAM.contrast, subjectDeltaE: SUBJECT_DELTA_E },
    radialProfile: { bins: RADIAL_PROFILE.bins, reach: RADIAL_PROFILE.reach },
    measures,
    length: measureLength + colourLength + hogLength,
  };
}

/**
 * The family of every descriptor value: measures, subject colour, background colour, subject
 * contrast, radial profile, gradients (HOG). Fitting balances the families (see fit.ts) so the 324
 * HOG values do not outweigh the 12 of the radial profile just by being many.
 */
export function descriptorFamilies(spec: DescriptorSpec): string[] {
  return descriptorNames(spec).map((n) =>
    n.startsWith('hog.') ? 'gradients' : n.startsWith('subject.radial') ? 'radial profile' : n.startsWith('subject.contrast') ? 'subject contrast' : n.startsWith('subject.') ? 'subject colour' : n.startsWith('background.') ? 'background colour' : 'measures',
  );
}

/** Names of every descriptor value, in order (measures, subject histograms, background histograms, subject contrast, HOG). */
export function descriptorNames(spec: DescriptorSpec): string[] {
  const out: string[] = [];
  for (const m of spec.measures) {
    if (m.period) out.push(`${m.name}.cos`, `${m.name}.sin`);
    else out.push(m.name);
  }
  for (const region of ['subject', 'background'])
    for (const ch of ['L', 'a', 'b']) for (let k = 0; k < spec.colourHistogram.bins; k++) out.push(`${region}.${ch}[${k}]`);
  for (const side of ['lighter', 'darker']) for (let k = 0; k < spec.colourHistogram.bins; k++) out.push(`subject.contrast.${side}[${k}]`);
  for (const what of ['dL', 'dE']) for (let k = 0; k < spec.radialProfile.bins; k++) out.push(`subject.radial.${what}[${k}]`);
  const blocks = spec.hog.size / spec.hog.cell - spec.hog.blockCells + 1;
  for (let by = 0; by < blocks; by++)
    for (let bx = 0; bx < blocks; bx++)
      for (let c = 0; c < spec.hog.blockCells ** 2; c++) for (let k = 0; k < spec.hog.bins; k++) out.push(`hog.block${by},${bx}.cell${c}.bin${k}`);
  return out;
}

/** CIELAB planes of an 8-bit sRGB image (D65). */
export function labPlanes(img: RgbaImage): { L: Float64Array; a: Float64Array; b: Float64Array } {
  const n = img.width * img.height;
  const L = new Float64Array(n);
  const a = new Float64Array(n);
  const b = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    const lab = linearRgbToLab(SRGB8_TO_LINEAR[img.data[p * 4]], SRGB8_TO_LINEAR[img.data[p * 4 + 1]], SRGB8_TO_LINEAR[img.data[p * 4 + 2]]);
    L[p] = lab[0];
    a[p] = lab[1];
    b[p] = lab[2];
  }
  return { L, a, b };
}


/**
 * A hard subject mask: pixels whose ΔE*ab from the image's median CIELAB colour (its dominant
 * colour: the background, as long as the subject covers less than half the image) exceeds
 * SUBJECT_DELTA_E, minus every such region connected to the image border (a vignette, a frame, a
 * darker corner), then cleaned as described below. Assumes one subject that sits inside the frame
 * on a ground that covers most of it; if nothing is left after removing border regions, the plain
 * threshold mask is kept. The border
 * median alone is not enough: on the demo's lit card with dark vignette corners it calls the whole
 * card the subject. Kept to one function so the built-in measures' own mask can replace it.
 */
export function subjectMask(lab: { L: Float64Array; a: Float64Array; b: Float64Array }, width: number, height: number, threshold = SUBJECT_DELTA_E): Uint8Array {
  const n = width * height;
  const bL = median(lab.L);
  const bA = median(lab.a);
  const bB = median(lab.b);
  const mask = new Uint8Array(n);
  for (let p = 0; p < n; p++) mask[p] = Math.hypot(lab.L[p] - bL, lab.a[p] - bA, lab.b[p] - bB) > threshold ? 1 : 0;
  // Drop regions connected to the border; of the rest, fill each region's holes (an inset of
  // background-like colour, e.g. a pale gem, belongs to the subject) and keep the largest region
  // whose filled extent covers at most MAX_FILLED_SHARE of the image: anything larger encloses
  // most of the frame (a ring or frame line), which is not a subject.
  const touching = floodFromBorder(mask, width, height);
  const inner = mask.map((v, p) => (v && !touching[p] ? 1 : 0));
  const regions = regionsBySize(inner, width, 6);
  for (const region of regions) {
    const outside = floodFromBorder(region.map((v) => 1 - v), width, height);
    const filled = region.map((_, p) => (outside[p] ? 0 : 1));
    if (filled.reduce((s, v) => s + v, 0) <= MAX_FILLED_SHARE * n) return filled;
  }
  return mask;
}

/** A region whose filled extent covers more of the image than this is a frame or ring, not a subject. */
const MAX_FILLED_SHARE = 0.45;

/** Pixels of `mask` 4-connected to the image border through `mask` pixels. */
function floodFromBorder(mask: Uint8Array, width: number, height: number): Uint8Array {
  const n = width * height;
  const reached = new Uint8Array(n);
  const stack: number[] = [];
  const visit = (p: number) => {
    if (mask[p] && !reached[p]) (reached[p] = 1), stack.push(p);
  };
  for (let x = 0; x < width; x++) visit(x), visit((height - 1) * width + x);
  for (let y = 0; y < height; y++) visit(y * width), visit(y * width + width - 1);
  while (stack.length) {
    const p = stack.pop()!;
    const x = p % width;
    if (x > 0) visit(p - 1);
    if (x < width - 1) visit(p + 1);
    if (p >= width) visit(p - width);
    if (p < n - width) visit(p + width);
  }
  return reached;
}

/** The `limit` largest 4-connected regions of a mask as separate masks, largest first. */
function regionsBySize(mask: Uint8Array, width: number, limit: number): Uint8Array[] {
  const label = new Int32Array(mask.length);
  const sizes: number[] = [0];
  for (let s = 0; s < mask.length; s++) {
    if (!mask[s] || label[s]) continue;
    const id = sizes.length;
    let size = 0;
    const stack = [s];
    label[s] = id;
    while (stack.length) {
      const p = stack.pop()!;
      size++;
      const x = p % width;
      if (x > 0 && mask[p - 1] && !label[p - 1]) (label[p - 1] = id), stack.push(p - 1);
      if (x < width - 1 && mask[p + 1] && !label[p + 1]) (label[p + 1] = id), stack.push(p + 1);
      if (p >= width && mask[p - width] && !label[p - width]) (label[p - width] = id), stack.push(p - width);
      if (p < mask.length - width && mask[p + width] && !label[p + width]) (label[p + width] = id), stack.push(p + width);
    }
    sizes.push(size);
  }
  const ids = sizes.map((_, i) => i).slice(1).sort((a, b) => sizes[b] - sizes[a]).slice(0, limit);
  return ids.map((id) => Uint8Array.from(label, (l) => (l === id ? 1 : 0)));
}

/**
 * Marginal L*, a*, b* histograms of the pixels where mask === want, each normalised to sum 1
 * (an empty region gives zeros), so they do not depend on image size or region area.
 */
export function colourHistograms(lab: { L: Float64Array; a: Float64Array; b: Float64Array }, mask: Uint8Array, want: 0 | 1, bins: number = COLOUR_HISTOGRAM.bins): Float64Array {
  const out = new Float64Array(3 * bins);
  const ranges = [COLOUR_HISTOGRAM.L, COLOUR_HISTOGRAM.a, COLOUR_HISTOGRAM.b];
  const planes = [lab.L, lab.a, lab.b];
  let count = 0;
  for (let p = 0; p < mask.length; p++) {
    if (mask[p] !== want) continue;
    count++;
    for (let c = 0; c < 3; c++) {
      const [lo, hi] = ranges[c];
      const k = Math.min(bins - 1, Math.max(0, Math.floor(((planes[c][p] - lo) / (hi - lo)) * bins)));
      out[c * bins + k]++;
    }
  }
  if (count > 0) for (let i = 0; i < out.length; i++) out[i] /= count;
  return out;
}

/**
 * Histogram of the subject's inner contrast: ΔE*ab of each subject pixel from the subject's median
 * L*, a*, b* (its dominant colour), normalised to sum 1, in two halves: pixels lighter than the
 * dominant colour (bins 0…7), then darker (bins 8…15). It does not move when the whole palette
 * turns, so an inset of another colour (a gem, an outline) shows as the share of pixels far from
 * the dominant colour whatever the hue.
 */
export function contrastHistogram(lab: { L: Float64Array; a: Float64Array; b: Float64Array }, mask: Uint8Array, bins: number = COLOUR_HISTOGRAM.bins, range: [number, number] = COLOUR_HISTOGRAM.contrast): Float64Array {
  const out = new Float64Array(2 * bins);
  const inside: number[] = [];
  for (let p = 0; p < mask.length; p++) if (mask[p]) inside.push(p);
  if (!inside.length) return out;
  const mL = median(inside.map((p) => lab.L[p]));
  const mA = median(inside.map((p) => lab.a[p]));
  const mB = median(inside.map((p) => lab.b[p]));
  for (const p of inside) {
    const dE = Math.hypot(lab.L[p] - mL, lab.a[p] - mA, lab.b[p] - mB);
    const k = Math.min(bins - 1, Math.max(0, Math.floor(((dE - range[0]) / (range[1] - range[0])) * bins)));
    // Lighter and darker than the dominant colour apart: an ink outline and a pale inset differ in sign.
    out[(lab.L[p] >= mL ? 0 : bins) + k] += 1 / inside.length;
  }
  return out;
}

/** Radial profile: bins of distance from the subject's centroid in units of its equivalent radius √(area/π). */
export const RADIAL_PROFILE = { bins: 6, reach: 1.5 } as const;

/**
 * Radial colour profile of the subject about its own centroid: for each ring of normalised radius
 * r/R_eq in [0, 1.5) (R_eq = √(area/π), the equivalent radius), the mean ΔL* and the mean ΔE*ab of
 * its subject pixels from the subject's median colour; 0 for an empty ring. Normalising by R_eq and
 * centring on the centroid makes it blind to the subject's size and position, so a centred inset
 * (its relative radius) shows whatever the subject's scale.
 */
export function radialProfile(lab: { L: Float64Array; a: Float64Array; b: Float64Array }, mask: Uint8Array, width: number, bins: number = RADIAL_PROFILE.bins, reach: number = RADIAL_PROFILE.reach): Float64Array {
  const out = new Float64Array(2 * bins);
  const inside: number[] = [];
  for (let p = 0; p < mask.length; p++) if (mask[p]) inside.push(p);
  if (!inside.length) return out;
  let cx = 0;
  let cy = 0;
  for (const p of inside) (cx += p % width), (cy += Math.floor(p / width));
  cx /= inside.length;
  cy /= inside.length;
  const rEq = Math.sqrt(inside.length / Math.PI);
  const mL = median(inside.map((p) => lab.L[p]));
  const mA = median(inside.map((p) => lab.a[p]));
  const mB = median(inside.map((p) => lab.b[p]));
  const count = new Float64Array(bins);
  for (const p of inside) {
    const r = Math.hypot((p % width) - cx, Math.floor(p / width) - cy) / rEq;
    const k = Math.floor((r / reach) * bins);
    if (k >= bins) continue;
    count[k]++;
    out[k] += lab.L[p] - mL;
    out[bins + k] += Math.hypot(lab.L[p] - mL, lab.a[p] - mA, lab.b[p] - mB);
  }
  for (let k = 0; k < bins; k++) if (count[k]) (out[k] /= count[k]), (out[bins + k] /= count[k]);
  return out;
}

/** Rec. 601 luma of 8-bit RGB scaled to [0, 1]. */
function luma01(img: RgbaImage): Float64Array {
  const n = img.width * img.height;
  const y = new Float64Array(n);
  for (let p = 0; p < n; p++) y[p] = (0.299 * img.data[p * 4] + 0.587 * img.data[p * 4 + 1] + 0.114 * img.data[p * 4 + 2]) / 255;
  return y;
}

/**
 * Area-average resampling of a single-channel image to size × size: each output pixel is the mean
 * of the input area it covers (fractional overlaps weighted), so an integer factor is a plain box mean.
 */
export function resampleArea(src: Float64Array, width: number, height: number, size: number): Float64Array {
  const out = new Float64Array(size * size);
  const fx = width / size;
  const fy = height / size;
  const overlaps = (n: number, f: number) =>
    Array.from({ length: size }, (_, o) => {
      const lo = o * f;
      const hi = lo + f;
      const w: [number, number][] = [];
      for (let i = Math.floor(lo); i < Math.min(n, Math.ceil(hi)); i++) {
        const part = Math.min(hi, i + 1) - Math.max(lo, i);
        if (part > 1e-12) w.push([i, part]);
      }
      return w;
    });
  const wx = overlaps(width, fx);
  const wy = overlaps(height, fy);
  for (let y = 0; y < size; y++)
    for (let x = 0; x < size; x++) {
      let s = 0;
      let area = 0;
      for (const [iy, py] of wy[y])
        for (const [ix, px] of wx[x]) {
          s += src[iy * width + ix] * py * px;
          area += py * px;
        }
      out[y * size + x] = s / area;
    }
  return out;
}

/**
 * HOG of a single-channel image (Dalal & Triggs 2005). Gradients by the centred difference
 * [−1, 0, 1] in x (columns) and y (rows, downwards); on the first and last column gx = 0 and on
 * the first and last row gy = 0. Unsigned orientation θ = atan2(gy, gx) mod 180°; bin k is centred
 * at (k + ½)·180°/bins and a pixel's magnitude is split linearly between the two nearest centres
 * (wrapping at 180°). Blocks of blockCells × blockCells cells (cells row-major inside a block,
 * blocks row-major) are L2-Hys normalised: v/√(‖v‖² + ε²), clipped at `clip`, normalised again.
 * Image sides must be whole multiples of the cell size.
 */
export function hogDescriptor(gray: ArrayLike<number>, width: number, height: number, p: HogParams = HOG): Float64Array {
  const cellsX = Math.floor(width / p.cell);
  const cellsY = Math.floor(height / p.cell);
  const cells = new Float64Array(cellsX * cellsY * p.bins);
  const binWidth = 180 / p.bins;
  for (let y = 0; y < cellsY * p.cell; y++)
    for (let x = 0; x < cellsX * p.cell; x++) {
      const gx = x === 0 || x === width - 1 ? 0 : gray[y * width + x + 1] - gray[y * width + x - 1];
      const gy = y === 0 || y === height - 1 ? 0 : gray[(y + 1) * width + x] - gray[(y - 1) * width + x];
      const mag = Math.hypot(gx, gy);
      if (mag === 0) continue;
      let theta = (Math.atan2(gy, gx) * 180) / Math.PI;
      theta = ((theta % 180) + 180) % 180;
      // Position in bin-centre units: centre k sits at k + ½ bin widths.
      const t = theta / binWidth - 0.5;
      const lo = Math.floor(t);
      const frac = t - lo;
      const k0 = (lo + p.bins) % p.bins;
      const k1 = (lo + 1) % p.bins;
      const base = (Math.floor(y / p.cell) * cellsX + Math.floor(x / p.cell)) * p.bins;
      cells[base + k0] += mag * (1 - frac);
      cells[base + k1] += mag * frac;
    }
  const blocksX = Math.floor((cellsX - p.blockCells) / p.stride) + 1;
  const blocksY = Math.floor((cellsY - p.blockCells) / p.stride) + 1;
  const per = p.blockCells * p.blockCells * p.bins;
  const out = new Float64Array(Math.max(0, blocksX * blocksY * per));
  const v = new Float64Array(per);
  for (let by = 0; by < blocksY; by++)
    for (let bx = 0; bx < blocksX; bx++) {
      let k = 0;
      for (let cy = 0; cy < p.blockCells; cy++)
        for (let cx = 0; cx < p.blockCells; cx++) {
          const base = ((by * p.stride + cy) * cellsX + bx * p.stride + cx) * p.bins;
          for (let b = 0; b < p.bins; b++) v[k++] = cells[base + b];
        }
      let norm = Math.sqrt(v.reduce((s, x) => s + x * x, 0) + p.epsilon ** 2);
      for (let i = 0; i < per; i++) v[i] = Math.min(v[i] / norm, p.clip);
      norm = Math.sqrt(v.reduce((s, x) => s + x * x, 0) + p.epsilon ** 2);
      const at = (by * blocksX + bx) * per;
      for (let i = 0; i < per; i++) out[at + i] = v[i] / norm;
    }
  return out;
}

/**
 * The descriptor of one image under `spec` (which must come from descriptorSpec(source)). A
 * measure that is NaN ("not measurable here") stays NaN; standardisation maps it to the mean.
 */
export function describeImage(img: RgbaImage, source: MeasureSource, spec: DescriptorSpec = descriptorSpec(source)): Float64Array {
  const out = new Float64Array(spec.length);
  let at = 0;
  const m = source.measure(img);
  spec.measures.forEach((info, i) => {
    const v = m[i];
    if (info.period) {
      const angle = (2 * Math.PI * v) / info.period;
      out[at++] = Math.cos(angle);
      out[at++] = Math.sin(angle);
    } else out[at++] = v;
  });
  const lab = labPlanes(img);
  const mask = subjectMask(lab, img.width, img.height, spec.colourHistogram.subjectDeltaE);
  out.set(colourHistograms(lab, mask, 1, spec.colourHistogram.bins), at);
  at += 3 * spec.colourHistogram.bins;
  out.set(colourHistograms(lab, mask, 0, spec.colourHistogram.bins), at);
  at += 3 * spec.colourHistogram.bins;
  out.set(contrastHistogram(lab, mask, spec.colourHistogram.bins, spec.colourHistogram.contrast), at);
  at += 2 * spec.colourHistogram.bins;
  out.set(radialProfile(lab, mask, img.width, spec.radialProfile.bins, spec.radialProfile.reach), at);
  at += 2 * spec.radialProfile.bins;
  const small = resampleArea(luma01(img), img.width, img.height, spec.hog.size);
  out.set(hogDescriptor(small, spec.hog.size, spec.hog.size, spec.hog), at);
  return out;
}
