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
import type { WorstProbe } from '../../core/audit/report.ts';
import { attributeDelta, scoreBatch, type AttributeSpec } from '../attributes.ts';
import type { Generator } from '../generator.ts';
import type { ScorerModel } from '../scorer-model.ts';
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
  /** Scores at +reference strength, [probe × attribute], for the combination check. */
  scoresAtReference: Float64Array;
}

export async function* measureDirection(c: MeasureContext, d: AuditDirection, tick: Tick): AsyncGenerator<AuditProgress, DirectionRun, void> {
  const { gen, plan, probes, specs, sigma } = c;
  const n = probes.seeds.length;
  const K = specs.length;
  const batch = gen.batchSize;
  const { grid, pathLengthGrid, reference: ref, epsilon: eps, distance, exponent } = plan;
  const { width, height } = gen.imageSize();
  const geometry: ImageLayout = { width, height, layout: gen.imageLayout, range: gen.range };
  const change = grid.map((s) => (s === 0 ? null : specs.map(() => new Float64Array(n))));
  const pathLength = pathLengthGrid.map(() => new Float64Array(n));
  const scoresAtReference = new Float64Array(n * K);
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
          for (let j = 0; j < K; j++) {
            change[gi]![j][p] = attributeDelta(probes.baseScores[p * K + j], sc[i * K + j], specs[j].period) / sigma[j];
            if (s === ref) scoresAtReference[p * K + j] = sc[i * K + j];
          }
        }
        yield tick(`auditing ${d.name} at ${formatStrength(s)}`);
      }
      if (pi >= 0) {
        // Path length: the same batch one ε further along the direction.
        const next = await gen.synthesize(editedProbes(c, at, m, [{ d, s: s + eps }]), m);
        const feats = distance === 'features' ? await Promise.all([out, next].map((o) => c.features!.features(Array.from({ length: m }, (_, i) => gen.toRgba(o.images, i))))) : null;
        // SSIM runs natively in the engine (same definition as the JS reference, checked in tests).
        const ssimBatch = c.ssimModel && geometry.layout === 'NCHW' ? await c.ssimModel.distances(out.images, next.images, m) : null;
        for (let i = 0; i < m; i++) {
          const raw = feats ? featureDistance(feats[0], feats[1], i) : ssimBatch ? ssimBatch[i] : imageDistance(distance as PathDistance, out.images, i, next.images, i, geometry);
          pathLength[pi][at + i] = raw / eps ** exponent;
        }
        yield tick(`path length of ${d.name} at ${formatStrength(s)}`);
      }
    }
  }
  return { measurements: { change, pathLength }, scoresAtReference };
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
      for (let j = 0; j < K; j++) {
        const base = probes.baseScores[p * K + j];
        const da = attributeDelta(base, a.scoresAtReference[p * K + j], specs[j].period);
        const db = attributeDelta(base, b.scoresAtReference[p * K + j], specs[j].period);
        const dab = attributeDelta(base, sc[i * K + j], specs[j].period);
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
