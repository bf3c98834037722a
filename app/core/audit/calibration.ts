// Calibrating the instrument in every audit (issue 9 part 3, METHODS §9.2): exact image operations
// applied to the probes' own images tell, per measure, (1) its noise floor — how much it moves
// under changes nobody could see (a sub-pixel shift, a 1.5° turn, ±1 code value of dither) — and
// (2) its cross-talk — how much it moves, relative to the measure an operation owns, under a
// visible exact translation, scaling, rotation, subject hue turn and background lightness shift
// that by construction change nothing else. A direction's "leak" into a measure that is no larger
// than the instrument shows by itself is not called a leak. Pure image operations here; the
// engine's calibrate step scores the results.
import { labToSrgb8, SRGB8_TO_LINEAR, linearRgbToLab } from '../color.ts';
import type { RgbaImage } from '../image.ts';
import { Random } from '../random.ts';

/** A change must exceed this multiple of the instrument's own noise floor (in σ) to count as a leak. */
export const FLOOR_MULTIPLE = 2;
/** A leak ratio must exceed this multiple of the cross-talk the target's own exact operation shows. */
export const CROSSTALK_MULTIPLE = 1.5;
/** Probes whose images are kept for calibration and change maps. */
export const CALIBRATION_PROBES = 24;

export interface Frame {
  /** centroid in pixel-index coordinates */
  cx: number;
  cy: number;
  /** soft subject mask (same size as the image) */
  mask: ArrayLike<number>;
  /** fill for pixels brought in from outside the image: the background colour */
  fill: [number, number, number];
}

export interface Operation {
  name: string;
  /** measures this operation moves by construction; the first is the one cross-talk is relative to */
  owns: string[];
  apply: (img: RgbaImage, frame: Frame, probe: number) => RgbaImage;
}

/** Resamples the image by a similarity transform about the centroid: output(q) = input(c + R(−θ)(q − c − d)/s), bilinear. */
export function similarity(img: RgbaImage, frame: Frame, t: { dx?: number; dy?: number; scale?: number; degrees?: number }): RgbaImage {
  const { width: w, height: h, data } = img;
  const out = new Uint8ClampedArray(data.length);
  const th = ((t.degrees ?? 0) * Math.PI) / 180;
  const c = Math.cos(th);
  const s = Math.sin(th);
  const k = 1 / (t.scale ?? 1);
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++) {
      const qx = x - frame.cx - (t.dx ?? 0);
      const qy = y - frame.cy - (t.dy ?? 0);
      const px = frame.cx + k * (c * qx + s * qy);
      const py = frame.cy + k * (-s * qx + c * qy);
      const o = (y * w + x) * 4;
      const x0 = Math.floor(px);
      const y0 = Math.floor(py);
      const fx = px - x0;
      const fy = py - y0;
      for (let ch = 0; ch < 3; ch++) {
        const at = (xx: number, yy: number) => (xx < 0 || yy < 0 || xx >= w || yy >= h ? frame.fill[ch] : data[(yy * w + xx) * 4 + ch]);
        out[o + ch] = Math.round((at(x0, y0) * (1 - fx) + at(x0 + 1, y0) * fx) * (1 - fy) + (at(x0, y0 + 1) * (1 - fx) + at(x0 + 1, y0 + 1) * fx) * fy);
      }
      out[o + 3] = 255;
    }
  return { width: w, height: h, data: out };
}

/** Turns each pixel's hue in CIE LCh(ab) by Δ·m (m = subject weight) at constant L* and C*ab. */
export function turnSubjectHue(img: RgbaImage, frame: Frame, degrees: number): RgbaImage {
  return mapLab(img, (L, a, b, m) => {
    const th = (degrees * m * Math.PI) / 180;
    return [L, a * Math.cos(th) - b * Math.sin(th), a * Math.sin(th) + b * Math.cos(th)];
  }, frame.mask);
}

/** Adds ΔL*·(1 − m) to each pixel's lightness: the background shifts, the subject does not. */
export function shiftBackgroundLightness(img: RgbaImage, frame: Frame, deltaL: number): RgbaImage {
  return mapLab(img, (L, a, b, m) => [L + deltaL * (1 - m), a, b], frame.mask);
}

function mapLab(img: RgbaImage, f: (L: number, a: number, b: number, m: number) => [number, number, number], mask: ArrayLike<number>): RgbaImage {
  const out = new Uint8ClampedArray(img.data.length);
  for (let p = 0; p < img.width * img.height; p++) {
    const d = img.data;
    const [L, a, b] = linearRgbToLab(SRGB8_TO_LINEAR[d[p * 4]], SRGB8_TO_LINEAR[d[p * 4 + 1]], SRGB8_TO_LINEAR[d[p * 4 + 2]]);
    out.set([...labToSrgb8(...f(L, a, b, mask[p])), 255], p * 4);
  }
  return { width: img.width, height: img.height, data: out };
}

/** ±1 code value of seeded random dither on every channel: invisible by any standard. */
export function dither(img: RgbaImage, seed: number): RgbaImage {
  const rng = new Random(seed, 0xd17e);
  const out = Uint8ClampedArray.from(img.data);
  for (let i = 0; i < out.length; i++) if (i % 4 !== 3) out[i] = out[i] + rng.int(3) - 1;
  return { width: img.width, height: img.height, data: out };
}

/** Operations too small to see: their scatter is each measure's noise floor. */
export const INVISIBLE: Operation[] = [
  {
    name: 'sub-pixel shift, 1.5° turn and ±1 dither',
    owns: ['subject_x', 'subject_y', 'orientation'],
    apply: (img, f, p) => {
      const r = new Random(p + 1, 0xf100);
      return dither(similarity(img, f, { dx: r.uniform() - 0.5, dy: r.uniform() - 0.5, degrees: 3 * (r.uniform() - 0.5) }), p);
    },
  },
  { name: '±1 dither', owns: [], apply: (img, _f, p) => dither(img, p + 7) },
  // A colour change below one JND (ΔE*ab ≈ 2.3): flat colours land on other 8-bit codes, which is
  // what a generator's smallest colour changes do to lightness and chroma measured from 8 bits.
  { name: 'subject hue +1.5° and background L* +0.3', owns: ['subject_hue', 'background_lightness'], apply: (img, f) => shiftBackgroundLightness(turnSubjectHue(img, f, 1.5), f, 0.3) },
];

/** Visible exact operations: each moves the measures it owns and, by construction, nothing else. */
export const EXACT: Operation[] = [
  { name: 'translate (3, −2) px', owns: ['subject_x', 'subject_y'], apply: (img, f) => similarity(img, f, { dx: 3, dy: -2 }) },
  { name: 'scale ×1.15 about the centroid', owns: ['subject_radius'], apply: (img, f) => similarity(img, f, { scale: 1.15 }) },
  { name: 'rotate 15° about the centroid', owns: ['orientation'], apply: (img, f) => similarity(img, f, { degrees: 15 }) },
  { name: 'subject hue +20° in LCh(ab)', owns: ['subject_hue'], apply: (img, f) => turnSubjectHue(img, f, 20) },
  { name: 'background L* +5', owns: ['background_lightness'], apply: (img, f) => shiftBackgroundLightness(img, f, 5) },
];

export interface MeasureCalibration {
  /** mean |Δ|/σ under invisible operations (owned measures: under the ones that do not own them) */
  noiseFloor: number;
  /** per exact operation: mean |Δ|/σ of this measure ÷ mean |Δ|/σ of the operation's first owned measure (null where it owns this one) */
  crossTalk: Record<string, number | null>;
}

/**
 * Per-measure calibration from per-probe normalised changes: `invisible[o][j][p]` and
 * `exact[o][j][p]` are |Δ_j|/σ_j of probe p under operation o (NaN = not measurable).
 */
export function calibrate(measures: string[], invisible: Float64Array[][], exact: Float64Array[][], operations: { invisible: Operation[]; exact: Operation[] } = { invisible: INVISIBLE, exact: EXACT }): Record<string, MeasureCalibration> {
  const mean = (col: Float64Array) => {
    let s = 0;
    let n = 0;
    for (const v of col) if (!Number.isNaN(v)) (s += v), n++;
    return n ? s / n : NaN;
  };
  const out: Record<string, MeasureCalibration> = {};
  measures.forEach((name, j) => {
    const floors = operations.invisible.map((op, o) => (op.owns.includes(name) ? NaN : mean(invisible[o][j]))).filter((v) => !Number.isNaN(v));
    const crossTalk: Record<string, number | null> = {};
    operations.exact.forEach((op, o) => {
      if (op.owns.includes(name)) return void (crossTalk[op.name] = null);
      const primary = measures.indexOf(op.owns[0]);
      const own = primary >= 0 ? mean(exact[o][primary]) : NaN;
      const v = mean(exact[o][j]);
      crossTalk[op.name] = own > 0 && !Number.isNaN(v) ? v / own : null;
    });
    out[name] = { noiseFloor: floors.length ? Math.max(...floors) : 0, crossTalk };
  });
  return out;
}

/** The exact operation that owns a measure (its cross-talk is the allowance for directions targeting it), or null. */
export function owningOperation(measure: string, operations: Operation[] = EXACT): Operation | null {
  return operations.find((op) => op.owns.includes(measure)) ?? null;
}
