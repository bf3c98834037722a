// Audit step 2, render and score: renders each direction along the strength grid from the probe
// codes, scores every image, and records per-probe attribute changes (Δ/σ) and path lengths; for
// pairs of directions, the non-additivity of attribute changes and the images' mixed difference;
// and PNG thumbnails of the probes the statistics found worst. Only numbers leave this step, never
// whole batches of images.
import { applyEdits, directionEdit } from '../../core/latent.ts';
import { downsampleImage, encodePng } from '../../core/image.ts';
import { imageDistance, type ImageLayout, type PathDistance } from '../../core/audit/path-length.ts';
import type { AuditDirection, AuditPlan, AuditProgress } from '../../core/audit/plan.ts';
import { significant, type DirectionMeasurements, type PairMeasurements, type WorstProbeChoice } from '../../core/audit/statistics.ts';
import { formatStrength } from '../../core/audit/verdict.ts';
import { ChangeMapAccumulator, type ChangeMapSummary } from '../../core/audit/change-map.ts';
import type { WorstProbe } from '../../core/audit/report.ts';
import { attributeChange as changeOf, scoreBatch, type AttributeSpec } from '../attributes.ts';
import type { Generator } from '../generator.ts';
import type { FloatRgbImage, ScorerModel } from '../scorer-model.ts';
import type { SsimDistanceModel } from '../distance-model.ts';
import type { ProbeSet, Tick } from './probes.ts';

/** Longer side of a worst-probe thumbnail, in pixels. */
const THUMBNAIL_SIZE = 48;
/** Step of the mixed finite difference for pairs, in σ units (METHODS §2.4). */
const PAIR_EPSILON = 1;

/** What every measurement shares: the generator, the probes and their scoring. */
export interface MeasureContext {
  gen: Generator;
  plan: AuditPlan;
  probes: ProbeSet;
  specs: AttributeSpec[];
  sigma: number[];
  /** Feature model for the 'features' distance. */
  features?: ScorerModel;
  /** Native SSIM distance, when the distance is SSIM and the images are large enough. */
  ssimModel: SsimDistanceModel | null;
}

/** Probe codes [at, at + m) with the edits applied (a copy). */
function editedProbes(c: MeasureContext, at: number, m: number, edits: { d: AuditDirection; s: number }[]): Float32Array {
  const per = c.gen.layout.layers * c.gen.layout.size;
  const codes = c.probes.codes.slice(at * per, (at + m) * per);
  return applyEdits(codes, c.gen.layout, edits.map((e) => directionEdit(e.d, e.s)));
}

export interface DirectionRun {
  measurements: DirectionMeasurements;
  /** Where the direction acts: per-pixel CIEDE2000 at +reference over the kept probe images. */
  changeMap: ChangeMapSummary | null;
  /** Scores at +reference strength, [probe × attribute], for the combination check. */
  scoresAtReference: Float64Array;
}

export async function* measureDirection(c: MeasureContext, d: AuditDirection, tick: Tick): AsyncGenerator<AuditProgress, DirectionRun, void> {
  const { gen, plan, probes, specs, sigma } = c;
  const n = probes.count;
  const K = specs.length;
  const batch = gen.batchSize;
  const { grid, pathLengthGrid, reference: ref, epsilon: eps, exponent } = plan;
  const change = grid.map((s) => (s === 0 ? null : specs.map(() => new Float64Array(n))));
  const pathLength = pathLengthGrid.map(() => new Float64Array(n));
  const scoresAtReference = new Float64Array(n * K);
  const changeMap = probes.images.length ? new ChangeMapAccumulator() : null;
  for (let gi = 0; gi < grid.length; gi++) {
    const s = grid[gi];
    const pi = pathLengthGrid.indexOf(s);
    if (s === 0 && pi < 0) continue;
    for (let at = 0; at < n; at += batch) {
      const m = Math.min(batch, n - at);
      const out = await gen.synthesize(editedProbes(c, at, m, [{ d, s }]), m);
      if (s !== 0) {
        const sc = await scoreBatch(gen, out, specs);
        for (let i = 0; i < m; i++) {
          const p = at + i;
          const baseRow = probes.baseScores.subarray(p * K, (p + 1) * K);
          const editRow = sc.subarray(i * K, (i + 1) * K);
          for (let j = 0; j < K; j++) {
            // NaN where the measure is not measurable on this probe: left out of the statistics.
            change[gi]![j][p] = changeOf(specs, j, baseRow, editRow) / sigma[j];
            if (s === ref) scoresAtReference[p * K + j] = sc[i * K + j];
          }
          if (s === ref && changeMap && p < probes.images.length) changeMap.add(probes.images[p], gen.toRgba(out.images, i));
        }
        yield tick(`auditing ${d.name} at ${formatStrength(s)}`);
      }
      if (pi >= 0) {
        // Path length: the same batch one ε further along the direction.
        const next = await gen.synthesize(editedProbes(c, at, m, [{ d, s: s + eps }]), m);
        const raw = await pairDistances(c, out.images, next.images, m);
        for (let i = 0; i < m; i++) pathLength[pi][at + i] = raw[i] / eps ** exponent;
        yield tick(`path length of ${d.name} at ${formatStrength(s)}`);
      }
    }
  }
  return { measurements: { change, pathLength }, scoresAtReference, changeMap: changeMap?.summary() ?? null };
}

/**
 * The null baseline's measurements (METHODS §10) for random directions, on the grid
 * [−reference, 0, +reference] with the end-point path length at 0: the same numbers
 * measureDirection gives on that grid, but each probe batch's unedited render is made once and
 * shared by every random direction (its scores are the probe set's base scores, already
 * computed), so only edited renders are new: three per direction and batch (±reference and one ε
 * step) instead of four.
 */
export async function* measureNullBaseline(c: MeasureContext, nulls: AuditDirection[], tick: Tick): AsyncGenerator<AuditProgress, DirectionMeasurements[], void> {
  const { gen, plan, probes, specs, sigma } = c;
  const n = probes.count;
  const K = specs.length;
  const batch = gen.batchSize;
  const { reference: ref, epsilon: eps, exponent } = plan;
  const out: DirectionMeasurements[] = nulls.map(() => ({
    change: [specs.map(() => new Float64Array(n)), null, specs.map(() => new Float64Array(n))],
    pathLength: [new Float64Array(n)],
  }));
  for (let at = 0; at < n; at += batch) {
    const m = Math.min(batch, n - at);
    // Strength 0 is the probe itself: rendered once per batch for all random directions.
    const base = await gen.synthesize(editedProbes(c, at, m, []), m);
    for (let k = 0; k < nulls.length; k++) {
      const d = nulls[k];
      for (const [row, s] of [[0, -ref], [2, ref]] as const) {
        const sc = await scoreBatch(gen, await gen.synthesize(editedProbes(c, at, m, [{ d, s }]), m), specs);
        for (let i = 0; i < m; i++) {
          const baseRow = probes.baseScores.subarray((at + i) * K, (at + i + 1) * K);
          const editRow = sc.subarray(i * K, (i + 1) * K);
          // NaN where the measure is not measurable on this probe, as for the audited directions.
          for (let j = 0; j < K; j++) out[k].change[row]![j][at + i] = changeOf(specs, j, baseRow, editRow) / sigma[j];
        }
      }
      const next = await gen.synthesize(editedProbes(c, at, m, [{ d, s: eps }]), m);
      const raw = await pairDistances(c, base.images, next.images, m);
      for (let i = 0; i < m; i++) out[k].pathLength[0][at + i] = raw[i] / eps ** exponent;
      yield tick(`null baseline: random direction ${k + 1} of ${nulls.length}`);
    }
  }
  return out;
}

/**
 * The path-length distance between image i of two float batches, for i < m: on the generator's
 * float output throughout (never 8-bit), natively for SSIM when the images are NCHW.
 */
export async function pairDistances(c: MeasureContext, a: Float32Array, b: Float32Array, m: number): Promise<Float64Array> {
  const { gen, plan } = c;
  const { width, height } = gen.imageSize();
  const geometry: ImageLayout = { width, height, layout: gen.imageLayout, range: gen.range };
  const out = new Float64Array(m);
  if (plan.distance === 'features') {
    const [fa, fb] = await Promise.all([a, b].map((x) => c.features!.features(Array.from({ length: m }, (_, i) => floatRgb(x, i, geometry)))));
    for (let i = 0; i < m; i++) out[i] = featureDistance(fa, fb, i);
    return out;
  }
  // SSIM runs natively in the engine (same definition as the JS reference, checked in tests).
  const native = c.ssimModel && geometry.layout === 'NCHW' ? await c.ssimModel.distances(a, b, m) : null;
  for (let i = 0; i < m; i++) out[i] = native ? native[i] : imageDistance(plan.distance as PathDistance, a, i, b, i, geometry);
  return out;
}

/** Image i of a float batch as RGB in [0, 1] (the output range mapped linearly; no rounding, no clamping). */
function floatRgb(images: Float32Array, i: number, g: ImageLayout): FloatRgbImage {
  const plane = g.width * g.height;
  const rgb = new Float32Array(plane * 3);
  const [lo, hi] = g.range;
  for (let p = 0; p < plane; p++)
    for (let ch = 0; ch < 3; ch++) rgb[p * 3 + ch] = ((g.layout === 'NCHW' ? images[i * 3 * plane + ch * plane + p] : images[(i * plane + p) * 3 + ch]) - lo) / (hi - lo);
  return { width: g.width, height: g.height, rgb };
}

/**
 * A direction's change map alone: the kept probe images against their edits at +reference, in
 * probe order — the same sums measureDirection accumulates, for a run whose other measurements
 * were made elsewhere (a farm's workers do not hold the probe images).
 */
export async function measureChangeMap(c: MeasureContext, d: AuditDirection): Promise<ChangeMapSummary | null> {
  const { gen, plan, probes } = c;
  const n = probes.images.length;
  if (!n) return null;
  const map = new ChangeMapAccumulator();
  for (let at = 0; at < n; at += gen.batchSize) {
    const m = Math.min(gen.batchSize, n - at);
    const out = await gen.synthesize(editedProbes(c, at, m, [{ d, s: plan.reference }]), m);
    for (let i = 0; i < m; i++) map.add(probes.images[at + i], gen.toRgba(out.images, i));
  }
  return map.summary();
}

/** Additivity of a pair: attribute changes at +reference, and the images' mixed difference at ±ε. */
export async function* measurePair(c: MeasureContext, a: { d: AuditDirection; scoresAtReference: Float64Array }, b: { d: AuditDirection; scoresAtReference: Float64Array }, tick: Tick): AsyncGenerator<AuditProgress, PairMeasurements, void> {
  const { gen, plan, probes, specs, sigma } = c;
  const K = specs.length;
  const batch = gen.batchSize;
  const count = plan.pairProbes;
  const ref = plan.reference;
  const label = `combining ${a.d.name} + ${b.d.name}`;
  const attributeChange = specs.map(() => new Float64Array(count));
  const imageInteraction = new Float64Array(count);
  const { width, height } = gen.imageSize();
  const e = PAIR_EPSILON;
  for (let at = 0; at < count; at += batch) {
    const m = Math.min(batch, count - at);
    const both = await gen.synthesize(editedProbes(c, at, m, [{ d: a.d, s: ref }, { d: b.d, s: ref }]), m);
    const sc = await scoreBatch(gen, both, specs);
    for (let i = 0; i < m; i++) {
      const p = at + i;
      const base = probes.baseScores.subarray(p * K, (p + 1) * K);
      const rowA = a.scoresAtReference.subarray(p * K, (p + 1) * K);
      const rowB = b.scoresAtReference.subarray(p * K, (p + 1) * K);
      const rowAB = sc.subarray(i * K, (i + 1) * K);
      for (let j = 0; j < K; j++) {
        const da = changeOf(specs, j, base, rowA);
        const db = changeOf(specs, j, base, rowB);
        const dab = changeOf(specs, j, base, rowAB);
        attributeChange[j][p] = Math.abs(dab - da - db) / sigma[j];
      }
    }
    yield tick(label);
    const corners = [];
    for (const [sa, sb] of [[e, e], [e, -e], [-e, e], [-e, -e]]) {
      corners.push(await gen.synthesize(editedProbes(c, at, m, [{ d: a.d, s: sa }, { d: b.d, s: sb }]), m));
      yield tick(label);
    }
    const [pp, pm, mp, mm] = corners;
    const size = 3 * width * height;
    for (let i = 0; i < m; i++) {
      let s2 = 0;
      for (let k = 0; k < size; k++) {
        const v = (pp.images[i * size + k] - pm.images[i * size + k] - mp.images[i * size + k] + mm.images[i * size + k]) / (4 * e * e);
        s2 += v * v;
      }
      imageInteraction[at + i] = Math.sqrt(s2 / size);
    }
  }
  return { attributeChange, imageInteraction };
}

/** Before/after PNG thumbnails of the chosen probes. */
export async function renderWorstProbes(c: MeasureContext, d: AuditDirection, chosen: WorstProbeChoice[]): Promise<WorstProbe[]> {
  const { gen } = c;
  const out: WorstProbe[] = [];
  for (const w of chosen) {
    const before = await gen.synthesize(editedProbes(c, w.index, 1, []), 1);
    const after = await gen.synthesize(editedProbes(c, w.index, 1, [{ d, s: w.strength }]), 1);
    out.push({ seed: w.seed, strength: w.strength, attribute: w.attribute, leakage: significant(w.leakage), before: thumbnail(gen, before.images), after: thumbnail(gen, after.images) });
  }
  return out;
}

function thumbnail(gen: Generator, images: Float32Array): Uint8Array {
  const img = gen.toRgba(images, 0);
  return encodePng(downsampleImage(img, img.width / THUMBNAIL_SIZE));
}

/** Squared L2 distance between feature vectors i of two batches (LPIPS-style, without learned weights). */
function featureDistance(a: { data: Float32Array; width: number }, b: { data: Float32Array; width: number }, i: number): number {
  let s = 0;
  for (let k = 0; k < a.width; k++) s += (a.data[i * a.width + k] - b.data[i * b.width + k]) ** 2;
  return s;
}
