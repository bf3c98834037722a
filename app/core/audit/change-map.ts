// Change maps: where a direction acts (METHODS §9.3). For each probe, the per-pixel CIEDE2000
// (Sharma, Wu & Dalal 2005; CIELAB with the D65 white) between the unedited image and its edit at
// the reference strength, averaged over probes into one map, with the share of the summed ΔE00
// inside the subject interior, on its edge band and in the background. Regions come from the
// subject separation of the built-in measures, taken on both images: interior = interior in both,
// background = background in both, edge = the rest (where the outline is or moves). Also how
// consistently the direction acts across seeds. Pure functions; the audit drives them.
import { ciede2000, type Lab } from '../color.ts';
import type { RgbaImage } from '../image.ts';
import { findSubject, toLab, REGION_BACKGROUND, REGION_INTERIOR, type LabImage } from '../scorers/subject.ts';

/** ΔE00 drawn at full intensity in the change-map PNG (a large, unmistakable colour change). */
export const CHANGE_MAP_FULL_SCALE = 20;

export interface RegionShares {
  /** shares of the summed ΔE00 (each 0–1; they add to 1 when anything changed) */
  subject: number;
  edge: number;
  background: number;
}

export interface ChangeMapSummary {
  width: number;
  height: number;
  probes: number;
  /** per-pixel ΔE00 averaged over probes, row-major */
  map: Float32Array;
  /** mean ΔE00 over all pixels and probes */
  meanDeltaE: number;
  shares: RegionShares;
  /** probes on which no subject separated in either image (their change counts as background) */
  noSubject: number;
}

/** Per-pixel CIEDE2000 between two CIELAB images of the same size. */
export function deltaE00Map(a: LabImage, b: LabImage): Float32Array {
  if (a.width !== b.width || a.height !== b.height) throw new Error(`change map: images differ in size (${a.width}×${a.height} vs ${b.width}×${b.height})`);
  const n = a.width * a.height;
  const out = new Float32Array(n);
  const p1: Lab = [0, 0, 0];
  const p2: Lab = [0, 0, 0];
  for (let p = 0; p < n; p++) {
    p1[0] = a.L[p];
    p1[1] = a.a[p];
    p1[2] = a.b[p];
    p2[0] = b.L[p];
    p2[1] = b.a[p];
    p2[2] = b.b[p];
    out[p] = ciede2000(p1, p2);
  }
  return out;
}

/** Accumulates probe/edit pairs of one direction into a mean change map and region shares. */
export class ChangeMapAccumulator {
  private sum: Float64Array | null = null;
  private width = 0;
  private height = 0;
  private count = 0;
  private noSubject = 0;
  private regionSum = { subject: 0, edge: 0, background: 0 };

  add(probe: RgbaImage, edit: RgbaImage): void {
    const a = toLab(probe);
    const b = toLab(edit);
    this.addLab(a, b, findSubject(a, probe).region, findSubject(b, edit).region);
  }

  /** The same from already converted images and their subject regions (REGION_* codes). */
  addLab(a: LabImage, b: LabImage, regionA: Uint8Array, regionB: Uint8Array): void {
    const map = deltaE00Map(a, b);
    if (!this.sum) {
      this.width = a.width;
      this.height = a.height;
      this.sum = new Float64Array(map.length);
    } else if (a.width !== this.width || a.height !== this.height) throw new Error('change map: every probe must have the same size');
    let any = false;
    for (let p = 0; p < map.length; p++) {
      const d = map[p];
      this.sum[p] += d;
      const ra = regionA[p];
      const rb = regionB[p];
      if (ra === REGION_INTERIOR && rb === REGION_INTERIOR) this.regionSum.subject += d;
      else if (ra === REGION_BACKGROUND && rb === REGION_BACKGROUND) this.regionSum.background += d;
      else this.regionSum.edge += d;
      if (ra !== REGION_BACKGROUND || rb !== REGION_BACKGROUND) any = true;
    }
    if (!any) this.noSubject++;
    this.count++;
  }

  summary(): ChangeMapSummary {
    if (!this.sum || this.count === 0) throw new Error('change map: no probes were added');
    const map = Float32Array.from(this.sum, (v) => v / this.count);
    const total = this.regionSum.subject + this.regionSum.edge + this.regionSum.background;
    const share = (v: number) => (total > 0 ? v / total : 0);
    let s = 0;
    for (const v of this.sum) s += v;
    return {
      width: this.width,
      height: this.height,
      probes: this.count,
      map,
      meanDeltaE: s / (this.count * map.length),
      shares: { subject: share(this.regionSum.subject), edge: share(this.regionSum.edge), background: share(this.regionSum.background) },
      noSubject: this.noSubject,
    };
  }
}

/**
 * The map as an image: ΔE00 0 → black, rising through deep red and orange to white at
 * `fullScale` and above (a single-direction heat ramp that stays ordered in lightness).
 */
export function changeMapImage(map: Float32Array, width: number, height: number, fullScale = CHANGE_MAP_FULL_SCALE): RgbaImage {
  const data = new Uint8ClampedArray(width * height * 4);
  for (let p = 0; p < width * height; p++) {
    const t = Math.min(1, Math.max(0, map[p] / fullScale));
    data[p * 4] = Math.round(255 * Math.min(1, t * 2));
    data[p * 4 + 1] = Math.round(255 * Math.min(1, Math.max(0, t * 2 - 0.6) / 1.4) ** 0.8);
    data[p * 4 + 2] = Math.round(255 * Math.max(0, t - 0.7) / 0.3);
    data[p * 4 + 3] = 255;
  }
  return { width, height, data };
}

export interface Consistency {
  /** probes with a measurable target effect */
  probes: number;
  median: number;
  mean: number;
  /** sample standard deviation (n − 1) / |mean|; Infinity when the mean is 0 */
  coefficientOfVariation: number;
  /** share of probes whose effect has the opposite sign to the median (zero effects are not flips) */
  flipShare: number;
}

/** How consistently a direction moves its target across probes (METHODS §9.3). NaN effects are left out. */
export function consistencyAcrossProbes(effects: ArrayLike<number>): Consistency {
  const xs = Array.from(effects).filter((v) => !Number.isNaN(v));
  const n = xs.length;
  if (n === 0) return { probes: 0, median: NaN, mean: NaN, coefficientOfVariation: NaN, flipShare: NaN };
  const sorted = [...xs].sort((a, b) => a - b);
  const median = n % 2 ? sorted[n >> 1] : (sorted[n / 2 - 1] + sorted[n / 2]) / 2;
  const mean = xs.reduce((a, b) => a + b, 0) / n;
  const sd = n > 1 ? Math.sqrt(xs.reduce((a, v) => a + (v - mean) ** 2, 0) / (n - 1)) : 0;
  const flips = median === 0 ? 0 : xs.filter((v) => Math.sign(v) === -Math.sign(median)).length;
  return { probes: n, median, mean, coefficientOfVariation: mean !== 0 ? sd / Math.abs(mean) : Infinity, flipShare: flips / n };
}
