// Built-in image measures, in families that each measure one thing and are blind to the others
// (METHODS §9): position, size, orientation, shape, subject colour, background colour, detail,
// symmetry, plus whole-image colourfulness kept as a described composite. All work on the 8-bit
// sRGB image production would see, after separating the subject from its background
// (./subject.ts). A measure that cannot be taken on an image (orientation of a round shape, hue of
// a grey) is NaN there: "not measurable", left out of statistics and counted, never noise.
import { findSubject, regionMedian, toLab, REGION_BACKGROUND, REGION_INTERIOR, type LabImage, type Subject } from './subject.ts';
import type { RgbaImage } from '../image.ts';

export interface MeasureInfo {
  name: string;
  family: 'position' | 'size' | 'orientation' | 'shape' | 'subject colour' | 'background colour' | 'detail' | 'symmetry' | 'composite';
  unit: string;
  range: string;
  description: string;
  /** Period for circular measures (differences wrap), e.g. 360 for hue in degrees. */
  period?: number;
  /** Circular with a per-image period 360°/k, k read from this measure of the unedited image. */
  periodFrom?: string;
  /** May be NaN ("not measurable here") on some images; says when. */
  undefinedWhen?: string;
  /** false: described and reported, but not a leak attribute unless the user picks it by name. */
  verdicts: boolean;
}

/** Orientation needs an angular harmonic at least this strong (|H_k|/H_0); below, it is noise. */
export const ORIENTATION_STRENGTH_FLOOR = 0.02;
/** Angular harmonics examined: k = 1…8 (period 360°/k). */
export const MAX_HARMONIC = 8;
/** Hue needs at least this chroma C*ab; a grey has no hue (CIE 15: h_ab undefined at C* = 0). */
export const HUE_CHROMA_FLOOR = 3;
/** Symmetry: colour differences are saturated at this ΔE*ab (a clearly different colour). */
const SYMMETRY_DELTA_E = 20;
/** Symmetry is compared on a grid of this many points per side across the subject's own extent. */
const SYMMETRY_GRID = 40;

export const IMAGE_MEASURES: MeasureInfo[] = [
  { name: 'subject_x', family: 'position', unit: 'fraction of the width', range: '0–1', description: 'subject centroid m10/m00, left to right', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'subject_y', family: 'position', unit: 'fraction of the height', range: '0–1', description: 'subject centroid m01/m00, top to bottom', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'subject_radius', family: 'size', unit: 'fraction of √(width·height)', range: '0–~0.5', description: 'equivalent radius √(m00/π) of the soft subject mask', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'orientation', family: 'orientation', unit: 'degrees, clockwise on screen', range: '±180/k (circular, period 360/k)', description: 'angle of the strongest angular harmonic k = 1…8 of the subject mask about its centroid, arg(H_k)/k', periodFrom: 'shape_fold', verdicts: true, undefinedWhen: `no harmonic reaches strength ${ORIENTATION_STRENGTH_FLOOR} (round shapes), or no subject` },
  { name: 'shape_fold', family: 'shape', unit: 'k (count)', range: '0–8', description: 'order k of the strongest angular harmonic (2 elongated, 5 five-pointed; 0 when none reaches the floor); sets the period of orientation', verdicts: false, undefinedWhen: 'no subject separates' },
  { name: 'shape_harmonic', family: 'shape', unit: '|H_k| / H_0', range: '0–1', description: 'strength of the strongest angular harmonic: 0 for a disc, larger for pointed or elongated shapes', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'shape_elongation', family: 'shape', unit: '1 − λ−/λ+', range: '0–1', description: 'from the principal second moments: 0 for a disc or any n-fold shape (n ≥ 3), → 1 for a line', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'shape_roundness', family: 'shape', unit: 'm00² / (2π(μ20 + μ02))', range: '0–1', description: '1 for a disc; the reciprocal of Hu’s first invariant φ1 times 1/(2π)', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'subject_lightness', family: 'subject colour', unit: 'L* (CIELAB, D65)', range: '0–100', description: 'median L* of the subject interior (eroded 2 px from its edge)', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'subject_chroma', family: 'subject colour', unit: 'C*ab', range: '0–~130', description: 'chroma of the median a*, b* of the subject interior', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'subject_hue', family: 'subject colour', unit: 'degrees h_ab', range: '0–360 (circular)', description: 'hue angle of the median a*, b* of the subject interior', period: 360, verdicts: true, undefinedWhen: `the subject is grey (C*ab < ${HUE_CHROMA_FLOOR})` },
  { name: 'background_lightness', family: 'background colour', unit: 'L* (CIELAB, D65)', range: '0–100', description: 'median L* outside the subject dilated by 3 px', verdicts: true },
  { name: 'background_chroma', family: 'background colour', unit: 'C*ab', range: '0–~130', description: 'chroma of the median a*, b* outside the dilated subject', verdicts: true },
  { name: 'background_hue', family: 'background colour', unit: 'degrees h_ab', range: '0–360 (circular)', description: 'hue angle of the median a*, b* outside the dilated subject', period: 360, verdicts: true, undefinedWhen: `the background is grey (C*ab < ${HUE_CHROMA_FLOOR})` },
  { name: 'subject_detail', family: 'detail', unit: 'Σ|∇L*| / √(subject area)', range: '0–~100', description: 'edge contrast and texture inside the subject (interior eroded 3 px, so the outline is not counted): total L* gradient over the interior divided by √(subject area), so scaling the same subject neither raises nor lowers it', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'edge_width', family: 'detail', unit: 'pixels', range: '~1 (crisp) and up', description: 'width of the subject’s edge ramp: (3/2)·Σ4m(1−m) / Σ|∇m| of the soft mask (exactly w for a linear ramp of w px)', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'symmetry', family: 'symmetry', unit: '1 − mirror difference', range: '0–1', description: 'best mirror agreement of shape and colour about an axis through the subject’s own centroid', verdicts: true, undefinedWhen: 'no subject separates' },
  { name: 'colourfulness', family: 'composite', unit: 'M3 (Hasler & Süsstrunk 2003)', range: '0–~110 (0 grey, 33 moderate, 59 quite, 82 highly)', description: 'colourfulness of the whole image; composite (grows with subject area and with both colours), not a leak attribute unless picked', verdicts: false },
];

const INDEX = new Map(IMAGE_MEASURES.map((m, i) => [m.name, i]));
export const measureIndex = (name: string): number => {
  const i = INDEX.get(name);
  if (i === undefined) throw new Error(`no built-in image measure '${name}'`);
  return i;
};

/** The period that differences of measure j wrap with, given the unedited image's measures. */
export function measurePeriod(j: number, base: ArrayLike<number>): number | undefined {
  const info = IMAGE_MEASURES[j];
  if (info.periodFrom) {
    const k = base[measureIndex(info.periodFrom)];
    return k > 0 ? 360 / k : NaN;
  }
  return info.period;
}

/**
 * Change of measure j from an unedited image (base row) to its edit (edit row), wrapped into
 * (−period/2, period/2] for circular measures. NaN when either side is not measurable, or when
 * the orientation's harmonic order differs between the two (the angles are then not comparable).
 */
export function measureDelta(j: number, base: ArrayLike<number>, edit: ArrayLike<number>): number {
  const info = IMAGE_MEASURES[j];
  let d = edit[j] - base[j];
  if (Number.isNaN(d)) return NaN;
  if (info.periodFrom) {
    const f = measureIndex(info.periodFrom);
    if (base[f] !== edit[f]) return NaN;
  }
  const period = measurePeriod(j, base);
  if (period !== undefined) {
    if (!(period > 0)) return NaN;
    d = ((d % period) + period) % period;
    if (d > period / 2) d -= period;
  }
  return d;
}

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


/** Everything measured on one image: the values in IMAGE_MEASURES order, and the subject found. */
export interface ImageAnalysis {
  values: Float64Array;
  subject: Subject;
  lab: LabImage;
}

/** Every built-in measure of one image, in IMAGE_MEASURES order; NaN where not measurable. */
export function measureImage(img: RgbaImage): Float64Array {
  return analyseImage(img).values;
}

export function analyseImage(img: RgbaImage): ImageAnalysis {
  const lab = toLab(img);
  const subject = findSubject(lab, img);
  const { width: w, height: h } = img;
  const values = new Float64Array(IMAGE_MEASURES.length).fill(NaN);
  const set = (name: string, v: number) => (values[measureIndex(name)] = v);
  set('colourfulness', colourfulness(img));

  // Background colour: median outside the dilated subject (the whole image when there is none).
  const [bL, bA, bB] = [lab.L, lab.a, lab.b].map((ch) => regionMedian(ch, subject.region, REGION_BACKGROUND));
  if (!Number.isNaN(bL)) {
    set('background_lightness', bL);
    set('background_chroma', Math.hypot(bA, bB));
    set('background_hue', hueOf(bA, bB));
  }
  if (!subject.found) return { values, subject, lab };

  const mo = imageMoments(subject.mask, w, h);
  set('subject_x', (mo.cx + 0.5) / w);
  set('subject_y', (mo.cy + 0.5) / h);
  set('subject_radius', Math.sqrt(mo.m00 / Math.PI) / Math.sqrt(w * h));
  // Shape is read from the mask re-sharpened to a one-pixel ramp about its half level: a soft
  // edge of fixed width in pixels would otherwise make a small subject look rounder than the same
  // subject drawn larger (shape would answer size), and a blur would change shape.
  const edge = edgeWidth(subject.mask, w, h);
  const gain = Number.isFinite(edge) ? Math.max(1, edge) : 1;
  const shapeMask = gain > 1 ? subject.mask.map((m) => Math.min(1, Math.max(0, 0.5 + (m - 0.5) * gain))) : subject.mask;
  const so = gain > 1 ? imageMoments(shapeMask, w, h) : mo;
  const root = Math.sqrt(4 * so.mu11 * so.mu11 + (so.mu20 - so.mu02) ** 2);
  const lp = so.mu20 + so.mu02 + root;
  const lm = so.mu20 + so.mu02 - root;
  set('shape_elongation', lp > 0 ? Math.max(0, 1 - lm / lp) : 0);
  set('shape_roundness', (so.m00 * so.m00) / (2 * Math.PI * (so.mu20 + so.mu02)));
  const harmonics = angularHarmonics(shapeMask, w, h, so.cx, so.cy);
  let k = 0;
  for (let j = 1; j <= MAX_HARMONIC; j++) if (harmonics.strength[j] > (k ? harmonics.strength[k] : 0)) k = j;
  const strength = k ? harmonics.strength[k] : 0;
  set('shape_harmonic', strength);
  const measurable = strength >= ORIENTATION_STRENGTH_FLOOR;
  set('shape_fold', measurable ? k : 0);
  if (measurable) set('orientation', harmonics.angle[k]);

  // Subject colour: median of the interior, so an inset of another colour does not move it.
  // A subject too thin to have an interior: its half-covered pixels instead.
  const which = subject.region.includes(REGION_INTERIOR) ? subject.region : Uint8Array.from(subject.mask, (m) => (m >= 0.5 ? REGION_INTERIOR : 0));
  const [sL, sA, sB] = [lab.L, lab.a, lab.b].map((ch) => regionMedian(ch, which, REGION_INTERIOR));
  set('subject_lightness', sL);
  set('subject_chroma', Math.hypot(sA, sB));
  set('subject_hue', hueOf(sA, sB));

  set('subject_detail', interiorGradient(lab, subject, w, h) / Math.sqrt(mo.m00));
  set('edge_width', edge);
  set('symmetry', mirrorSymmetry(lab, shapeMask, w, h, so.cx, so.cy));
  return { values, subject, lab };
}

function hueOf(a: number, b: number): number {
  if (!(Math.hypot(a, b) >= HUE_CHROMA_FLOOR)) return NaN;
  const h = (Math.atan2(b, a) * 180) / Math.PI;
  return h < 0 ? h + 360 : h;
}

/**
 * Angular harmonics of a mask about (cx, cy) (METHODS §9.1): H_k = Σ m(x, y)·e^{ikφ} over pixels,
 * the area-weighted form of Σ m(r, φ)·r·e^{ikφ} over polar samples. φ is measured with y pointing
 * down, so arg(H_2)/2 equals the second-moment angle ½·atan2(2μ11, μ20 − μ02) (clockwise on
 * screen positive) for any shape symmetric about its axes. Strength |H_k|/H_0; angle arg(H_k)/k
 * in degrees, in (−180/k, 180/k]. Pixels within half a pixel of the centroid have no direction and
 * are left out.
 */
export function angularHarmonics(mask: ArrayLike<number>, w: number, h: number, cx: number, cy: number): { strength: number[]; angle: number[] } {
  const re = new Float64Array(MAX_HARMONIC + 1);
  const im = new Float64Array(MAX_HARMONIC + 1);
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++) {
      const m = mask[y * w + x];
      if (!m) continue;
      const dx = x - cx;
      const dy = y - cy;
      const r = Math.hypot(dx, dy);
      if (r < 0.5) continue;
      // e^{iφ} from the offset, then powers by repeated multiplication.
      const c1 = dx / r;
      const s1 = dy / r;
      let c = 1;
      let s = 0;
      re[0] += m;
      for (let k = 1; k <= MAX_HARMONIC; k++) {
        const nc = c * c1 - s * s1;
        s = c * s1 + s * c1;
        c = nc;
        re[k] += m * c;
        im[k] += m * s;
      }
    }
  const strength = [1];
  const angle = [0];
  for (let k = 1; k <= MAX_HARMONIC; k++) {
    strength.push(re[0] > 0 ? Math.hypot(re[k], im[k]) / re[0] : 0);
    angle.push((Math.atan2(im[k], re[k]) * 180) / Math.PI / k);
  }
  return { strength, angle };
}

/**
 * Σ|∇L*| (central differences) over the subject interior eroded one more pixel than the colour
 * interior. The caller divides by √(subject area): internal edges scale in length with the
 * subject and so does the square root of its area, so a scaled subject keeps its value.
 */
function interiorGradient(lab: LabImage, subject: Subject, w: number, h: number): number {
  let s = 0;
  const inner = (p: number) => subject.region[p] === REGION_INTERIOR;
  for (let y = 1; y < h - 1; y++)
    for (let x = 1; x < w - 1; x++) {
      const p = y * w + x;
      if (!(inner(p) && inner(p - 1) && inner(p + 1) && inner(p - w) && inner(p + w))) continue;
      s += 0.5 * Math.hypot(lab.L[p + 1] - lab.L[p - 1], lab.L[p + w] - lab.L[p - w]);
    }
  return s;
}

/** Edge ramp width in pixels: (3/2)·Σ 4m(1−m) / Σ|∇m|, exactly w for a linear ramp of width w. */
function edgeWidth(mask: Float64Array, w: number, h: number): number {
  let band = 0;
  let variation = 0;
  for (let y = 1; y < h - 1; y++)
    for (let x = 1; x < w - 1; x++) {
      const p = y * w + x;
      const m = mask[p];
      band += 4 * m * (1 - m);
      variation += 0.5 * Math.hypot(mask[p + 1] - mask[p - 1], mask[p + w] - mask[p - w]);
    }
  return variation > 0 ? (1.5 * band) / variation : NaN;
}

function bilinear(ch: ArrayLike<number>, w: number, h: number, x: number, y: number): number {
  if (x < 0 || y < 0 || x > w - 1 || y > h - 1) return NaN;
  const x0 = Math.min(w - 2, Math.floor(x));
  const y0 = Math.min(h - 2, Math.floor(y));
  const fx = x - x0;
  const fy = y - y0;
  const p = y0 * w + x0;
  return (ch[p] * (1 - fx) + ch[p + 1] * fx) * (1 - fy) + (ch[p + w] * (1 - fx) + ch[p + w + 1] * fx) * fy;
}

/**
 * Mirror symmetry about the best axis through the subject's own centroid: 1 − ½(shape mismatch +
 * colour mismatch), on a grid spanning the subject's extent (so size and position do not matter),
 * searched over axis angles (so rotation does not matter). Shape mismatch Σ|m − m'| / Σ(m + m');
 * colour mismatch the overlap-weighted mean of min(1, ΔE*ab / 20) between mirrored points
 * (Euclidean ΔE*ab, unchanged by a hue rotation).
 */
function mirrorSymmetry(lab: LabImage, mask: Float64Array, w: number, h: number, cx: number, cy: number): number {
  let R = 0;
  for (let y = 0; y < h; y++) for (let x = 0; x < w; x++) if (mask[y * w + x] > 0) R = Math.max(R, Math.hypot(x - cx, y - cy));
  R += 1;
  const G = SYMMETRY_GRID;
  const pts: { u: number; v: number; m: number; L: number; a: number; b: number }[] = [];
  const sample = (x: number, y: number) => {
    const m = bilinear(mask, w, h, x, y);
    return Number.isNaN(m) ? { m: 0, L: 0, a: 0, b: 0 } : { m, L: bilinear(lab.L, w, h, x, y), a: bilinear(lab.a, w, h, x, y), b: bilinear(lab.b, w, h, x, y) };
  };
  for (let i = 0; i < G; i++)
    for (let j = 0; j < G; j++) {
      const u = ((i + 0.5) / G) * 2 * R - R;
      const v = ((j + 0.5) / G) * 2 * R - R;
      if (u * u + v * v > R * R) continue;
      pts.push({ u, v, ...sample(cx + u, cy + v) });
    }
  const score = (alpha: number) => {
    const c = Math.cos(2 * alpha);
    const s = Math.sin(2 * alpha);
    let diff = 0;
    let total = 0;
    let colour = 0;
    let overlap = 0;
    for (const p of pts) {
      const q = sample(cx + c * p.u + s * p.v, cy + s * p.u - c * p.v);
      diff += Math.abs(p.m - q.m);
      total += p.m + q.m;
      const o = Math.min(p.m, q.m);
      if (o > 0) {
        colour += o * Math.min(1, Math.hypot(p.L - q.L, p.a - q.a, p.b - q.b) / SYMMETRY_DELTA_E);
        overlap += o;
      }
    }
    return 1 - 0.5 * ((total > 0 ? diff / total : 1) + (overlap > 0 ? colour / overlap : 1));
  };
  // Coarse search over axes every 5°, then refine around the best to 0.25°.
  let best = 0;
  let bestScore = -Infinity;
  for (let d = 0; d < 180; d += 5) {
    const v = score((d * Math.PI) / 180);
    if (v > bestScore) (bestScore = v), (best = d);
  }
  for (let step = 2.5; step >= 0.25; step /= 2)
    for (const d of [best - step, best + step]) {
      const v = score((d * Math.PI) / 180);
      if (v > bestScore) (bestScore = v), (best = d);
    }
  return bestScore;
}
