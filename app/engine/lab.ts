// Direction lab operations that need the generator: sampling codes with attribute scores,
// discovery by each method, boundaries and repair. Each result carries a provenance record.
import { readFileSync } from 'node:fs';
import { PlumblineError } from '../core/errors.ts';
import { differenceOfMeans, linearBoundary, pcaDirections, projectOff, sefaDirections } from '../core/discovery/methods.ts';
import { decodeModel } from '../core/onnx/inspect.ts';
import { latentWeights } from '../core/onnx/trace.ts';
import { dci, mig, type Score } from '../core/metrics.ts';
import { applyEdits } from '../core/latent.ts';
import { Random } from '../core/random.ts';
import { resolveAttributes, scoreBatch } from './attributes.ts';
import type { Generator } from './generator.ts';

export interface Provenance {
  method: 'pca' | 'sefa' | 'boundary' | 'difference-of-means' | 'repair' | 'imported' | 'authored';
  parameters: Record<string, unknown>;
  samples: number | null;
  seed: number | null;
  generator: string;
  createdAt: string;
  parent?: string;
}

export interface LabDirection {
  name: string;
  target: string | null;
  layers: [number, number] | null;
  vector: Float32Array;
  sigma: number;
  notes: string;
  source: Provenance;
}

const DISCOVERY_SEED_BASE = 0x50000000;
/**
 * Share of samples kept on each side of a boundary. The published default is 0.02 of 500,000
 * samples; with the few thousand samples a CPU session affords, 0.25 of 4,000 keeps 1,000 per side
 * and recovers a known normal within a few degrees on the demo generator (see the tests).
 */
export const BOUNDARY_FRACTION = 0.25;

function provenance(gen: Generator, method: Provenance['method'], parameters: Record<string, unknown>, samples: number | null, seed: number | null, parent?: string): Provenance {
  return { method, parameters, samples, seed, generator: gen.info.fingerprint, createdAt: new Date().toISOString(), ...(parent ? { parent } : {}) };
}

/** W codes (one row per sample, before W+ broadcast) of seeded random samples. */
export async function sampleCodes(gen: Generator, count: number, seed: number, psi = 1): Promise<{ seeds: number[]; codes: Float32Array }> {
  const seeds = Array.from({ length: count }, (_, i) => DISCOVERY_SEED_BASE + seed * 100_003 + i);
  const all = await gen.codesForSeeds(seeds, psi);
  const { layers, size } = gen.layout;
  if (layers === 1) return { seeds, codes: all };
  const codes = new Float32Array(count * size);
  for (let i = 0; i < count; i++) codes.set(all.subarray(i * layers * size, i * layers * size + size), i * size);
  return { seeds, codes };
}


export async function discoverPca(gen: Generator, options: { samples?: number; components?: number; seed?: number; layers?: [number, number] | null }): Promise<LabDirection[]> {
  const samples = options.samples ?? 4000;
  const seed = options.seed ?? 1;
  const { codes } = await sampleCodes(gen, samples, seed);
  const { directions, explained } = pcaDirections(codes, gen.layout.size, options.components ?? 8);
  const layers = options.layers ?? null;
  return directions.map((d, i) => ({
    name: `pca_${i}${layers ? `_l${layers[0]}-${layers[1] - 1}` : ''}`,
    target: null,
    layers,
    vector: d.vector,
    sigma: gen.sigmaOf(d.vector, layers),
    notes: `principal component ${i} of W: ${(explained[i] * 100).toFixed(1)}% of the variance`,
    source: provenance(gen, 'pca', { components: options.components ?? 8, layers }, samples, seed),
  }));
}

/** SeFa on the weights that first act on the latent (optionally only those reading W+ rows in `layers`). */
export function discoverSefa(gen: Generator, options: { components?: number; layers?: [number, number] | null }): LabDirection[] {
  const synthesisFile = gen.synthesisFile;
  const model = decodeModel(new Uint8Array(readFileSync(synthesisFile)), synthesisFile);
  let weights = latentWeights(model, gen.latentInputName, gen.layout.size);
  const layers = options.layers ?? null;
  if (layers) weights = weights.filter((w) => w.layer === null || (w.layer >= layers[0] && w.layer < layers[1]));
  if (weights.length === 0) throw new PlumblineError('bad-request', `${synthesisFile}: found no MatMul/Gemm weight acting on latent input '${gen.latentInputName}'${layers ? ` for layers ${layers[0]}–${layers[1] - 1}` : ''}; closed-form factorization needs one`, { file: synthesisFile });
  const found = sefaDirections(weights, gen.layout.size, options.components ?? 8);
  return found.map((d, i) => ({
    name: `sefa_${i}${layers ? `_l${layers[0]}-${layers[1] - 1}` : ''}`,
    target: null,
    layers,
    vector: d.vector,
    sigma: gen.sigmaOf(d.vector, layers),
    notes: `closed-form factorization eigenvector ${i} (eigenvalue ${d.score.toFixed(3)}) of ${weights.map((w) => w.name).join(', ')}`,
    source: provenance(gen, 'sefa', { components: options.components ?? 8, layers, weights: weights.map((w) => ({ name: w.name, layer: w.layer })) }, null, null),
  }));
}

export interface BoundaryOptions {
  samples?: number;
  fraction?: number;
  seed?: number;
  attributes?: 'default' | 'card' | 'image' | 'all';
  /** Fit in whitened coordinates (shrunk covariance) instead of W's own, the published default. */
  whiten?: boolean;
  shrinkage?: number | 'ledoit-wolf';
  /** Awaited between batches: lets a host serve previews and cancel. */
  checkpoint?: () => Promise<void>;
}

/** Boundaries for several attributes from one sampling pass (render once, fit each). */
export async function fitBoundaries(gen: Generator, attributes: string[], options: BoundaryOptions = {}): Promise<(LabDirection & { accuracy: number })[]> {
  const samples = options.samples ?? 4000;
  const seed = options.seed ?? 1;
  const fraction = options.fraction ?? BOUNDARY_FRACTION;
  const specs = resolveAttributes(gen, attributes);
  const K = specs.length;
  const { seeds, codes } = await sampleCodes(gen, samples, seed);
  const scores = new Float64Array(samples * K);
  for (let at = 0; at < samples; at += gen.batchSize) {
    const out = await gen.renderSeeds(seeds.slice(at, at + gen.batchSize), 1, []);
    scores.set(await scoreBatch(gen, out, specs), at * K);
    await options.checkpoint?.();
  }
  return specs.map((spec, j) => {
    // Samples where a built-in measure is "not measurable" (NaN) are left out of the fit.
    const keep = Array.from({ length: samples }, (_, i) => i).filter((i) => !Number.isNaN(scores[i * K + j]));
    if (keep.length < 4) throw new PlumblineError('bad-request', `${spec.name} is measurable on only ${keep.length} of ${samples} samples; no boundary can be fitted`);
    const D = gen.layout.size;
    const column = Float64Array.from(keep, (i) => scores[i * K + j]);
    const kept = keep.length === samples ? codes : (() => {
      const out = new Float32Array(keep.length * D);
      keep.forEach((i, r) => out.set(codes.subarray(i * D, (i + 1) * D), r * D));
      return out;
    })();
    const r = linearBoundary(kept, D, column, { fraction, seed, whiten: options.whiten ?? false, shrinkage: options.shrinkage });
    return {
      name: `boundary_${spec.name}`,
      target: spec.name,
      layers: null,
      vector: r.vector,
      sigma: gen.sigmaOf(r.vector, null),
      notes: `linear SVM boundary for ${spec.name}: ${r.perSide} samples per side, held-out accuracy ${(r.accuracy * 100).toFixed(1)}%`,
      source: provenance(gen, 'boundary', { attribute: spec.name, fraction, perSide: r.perSide, heldOutAccuracy: r.accuracy, coordinates: r.shrinkage === null ? 'latent' : 'whitened', shrinkage: r.shrinkage }, samples, seed),
      accuracy: r.accuracy,
    };
  });
}

export async function fitBoundary(gen: Generator, attribute: string, options: BoundaryOptions = {}): Promise<LabDirection & { accuracy: number }> {
  return (await fitBoundaries(gen, [attribute], options))[0];
}

export async function discoverByTags(gen: Generator, positiveSeeds: number[], negativeSeeds: number[], name: string, psi = 1): Promise<LabDirection> {
  const toW = async (seeds: number[]) => {
    const all = await gen.codesForSeeds(seeds, psi);
    const { layers, size } = gen.layout;
    const out = new Float32Array(seeds.length * size);
    for (let i = 0; i < seeds.length; i++) out.set(all.subarray(i * layers * size, i * layers * size + size), i * size);
    return out;
  };
  const vector = differenceOfMeans(await toW(positiveSeeds), await toW(negativeSeeds), gen.layout.size);
  return {
    name,
    target: null,
    layers: null,
    vector,
    sigma: gen.sigmaOf(vector, null),
    notes: `difference of means of ${positiveSeeds.length} tagged-with and ${negativeSeeds.length} tagged-without seeds`,
    source: provenance(gen, 'difference-of-means', { positive: positiveSeeds, negative: negativeSeeds, psi }, positiveSeeds.length + negativeSeeds.length, null),
  };
}

/**
 * Projects `direction` off the boundaries of the `against` attributes and renormalises; `hold`
 * attributes keep their response (see projectOff). Boundaries come from one sampling pass.
 */
export async function repairDirection(
  gen: Generator,
  direction: { name: string; target: string | null; layers: [number, number] | null; vector: Float32Array },
  against: string[],
  options: BoundaryOptions & { layers?: [number, number] | null; hold?: 'others' | string[] } = {},
): Promise<LabDirection & { boundaries: { attribute: string; accuracy: number; role: 'removed' | 'held' }[] }> {
  if (against.length === 0) throw new PlumblineError('bad-request', 'repair needs at least one attribute to project off');
  if (direction.vector.length !== gen.layout.size) throw new PlumblineError('latent-size-mismatch', `repair works on single-row directions of size ${gen.layout.size}; '${direction.name}' has ${direction.vector.length} values`);
  if (direction.target && against.includes(direction.target)) throw new PlumblineError('bad-request', `'${direction.name}' targets ${direction.target}; projecting it off its own target would remove the edit`);
  // 'others': every attribute the generator declares except those removed and the target.
  const asked = options.hold === 'others' ? gen.attributeNames : (options.hold ?? []);
  const hold = asked.filter((h) => !against.includes(h) && h !== direction.target);
  const fitted = await fitBoundaries(gen, [...against, ...hold], options);
  const vector = projectOff(direction.vector, fitted.slice(0, against.length).map((b) => b.vector), fitted.slice(against.length).map((b) => b.vector));
  const layers = options.layers === undefined ? direction.layers : options.layers;
  const boundaries = fitted.map((b, i) => ({ attribute: b.target!, accuracy: b.accuracy, role: (i < against.length ? 'removed' : 'held') as 'removed' | 'held' }));
  return {
    name: `${direction.name}_repaired`,
    target: direction.target,
    layers,
    vector,
    sigma: gen.sigmaOf(vector, layers),
    notes: `${direction.name} projected off the boundaries of ${against.join(', ')}${hold.length ? `, holding ${hold.join(', ')}` : ''}`,
    source: provenance(gen, 'repair', { against, hold, boundaries, layers }, options.samples ?? 4000, options.seed ?? 1, direction.name),
    boundaries,
  };
}

/** A discovery as the app and the CLI ask for it (the protocol's lab.discover parameters without the strips). */
export interface DiscoveryRequest {
  method: 'pca' | 'sefa' | 'boundary' | 'means';
  components: number;
  samples: number;
  seed: number;
  layers: [number, number] | null;
  /** The attribute a boundary separates. */
  attribute?: string;
  /** Seeds tagged as having / lacking the attribute (difference of means). */
  positive: number[];
  negative: number[];
  /** Name for the direction when the method finds exactly one. */
  name?: string;
}

/** The one place a discovery method is chosen; `checkpoint` is awaited between batches. */
export async function discover(gen: Generator, r: DiscoveryRequest, checkpoint?: () => Promise<void>): Promise<LabDirection[]> {
  let found: LabDirection[];
  if (r.method === 'pca') found = await discoverPca(gen, { samples: r.samples, components: r.components, seed: r.seed, layers: r.layers });
  else if (r.method === 'sefa') found = discoverSefa(gen, { components: r.components, layers: r.layers });
  else if (r.method === 'boundary') {
    if (!r.attribute) throw new PlumblineError('bad-request', 'a boundary needs an attribute');
    found = [await fitBoundary(gen, r.attribute, { samples: r.samples, seed: r.seed, checkpoint })];
  } else {
    if (r.positive.length === 0 || r.negative.length === 0) throw new PlumblineError('bad-request', 'difference of means needs seeds tagged as having and as lacking the attribute');
    found = [await discoverByTags(gen, r.positive, r.negative, r.name ?? 'tagged')];
  }
  return found.map((f) => (r.name && found.length === 1 ? { ...f, name: r.name } : f));
}

/** Strength range of the random edits for MIG/DCI on responses: ±this many σ (the audit's default reference strength). */
export const RESPONSE_STRENGTH = 2;
/** Random edits measured against each rendered base latent (MIG/DCI on responses). */
const EDITS_PER_BASE = 4;

/**
 * MIG and DCI of a set of directions against the generator's declared factors (its card's
 * attribute outputs), computed from what the edits DO: each sample is a random probe with every
 * direction applied at an independent random strength s_j ~ U(−2, 2) σ_j (four such edits per
 * random base latent; through the same edit
 * rule as the audit, so per-layer W+ vectors and layer ranges count in full); its codes are the
 * strengths s_j and its factors the change of each declared attribute against the unedited
 * probe. A clean set moves each factor through one direction only (high MIG and D), whatever W's
 * own statistics are. Scores the definition leaves undefined (one code, one factor) are 'undefined'.
 */
export async function groundTruthMetrics(gen: Generator, directions: { name: string; vector: Float32Array; layers: [number, number] | null; sigma: number }[], samples = 2000, seed = 1, checkpoint?: () => Promise<void>) {
  const factorsNames = gen.attributeNames;
  if (!factorsNames.length) return null;
  const J = directions.length;
  const K = factorsNames.length;
  // Each random base latent carries EDITS_PER_BASE independent random edits: a sample costs
  // 1 + 1/EDITS_PER_BASE renders instead of 2, and every change is still against its own base.
  const bases = Math.ceil(samples / EDITS_PER_BASE);
  const baseSeeds = Array.from({ length: bases }, (_, i) => DISCOVERY_SEED_BASE + (seed + 7) * 100_003 + i);
  const rng = new Random(seed, 0x3161);
  const codes = new Float64Array(samples * J);
  for (let i = 0; i < samples * J; i++) codes[i] = (2 * rng.uniform() - 1) * RESPONSE_STRENGTH;
  const factors = new Float64Array(samples * K);
  const per = gen.layout.layers * gen.layout.size;
  const baseCodes = await gen.codesForSeeds(baseSeeds, 1);
  const baseAttributes = new Float64Array(bases * K);
  for (let at = 0; at < bases; at += gen.batchSize) {
    const m = Math.min(gen.batchSize, bases - at);
    const out = await gen.synthesize(baseCodes.slice(at * per, (at + m) * per), m);
    if (out.attributes) baseAttributes.set(out.attributes, at * K);
    await checkpoint?.();
  }
  for (let at = 0; at < samples; at += gen.batchSize) {
    const m = Math.min(gen.batchSize, samples - at);
    const edited = new Float32Array(m * per);
    for (let i = 0; i < m; i++) {
      const b = Math.floor((at + i) / EDITS_PER_BASE);
      const one = edited.subarray(i * per, (i + 1) * per);
      one.set(baseCodes.subarray(b * per, (b + 1) * per));
      applyEdits(one, gen.layout, directions.map((d, j) => ({ vector: d.vector, layers: d.layers, step: codes[(at + i) * J + j] * d.sigma })));
    }
    const after = await gen.synthesize(edited, m);
    if (after.attributes)
      for (let i = 0; i < m; i++) {
        const b = Math.floor((at + i) / EDITS_PER_BASE);
        for (let k = 0; k < K; k++) factors[(at + i) * K + k] = after.attributes[i * K + k] - baseAttributes[b * K + k];
      }
    await checkpoint?.();
  }
  // Factors that no edit moves carry no information and would make H(v) = 0.
  const varying = factorsNames.map((_, k) => k).filter((k) => {
    let lo = Infinity;
    let hi = -Infinity;
    for (let i = 0; i < samples; i++) {
      lo = Math.min(lo, factors[i * K + k]);
      hi = Math.max(hi, factors[i * K + k]);
    }
    return hi - lo > 1e-6 * Math.max(1, Math.abs(hi), Math.abs(lo));
  });
  const F = new Float64Array(samples * varying.length);
  for (let i = 0; i < samples; i++) varying.forEach((k, c) => (F[i * varying.length + c] = factors[i * K + k]));
  const four = (v: Score) => (typeof v === 'number' ? Number(v.toFixed(4)) : v);
  const m = varying.length ? mig(codes, J, F, varying.length) : { mig: 'undefined' as const };
  const d = varying.length ? dci(codes, J, F, varying.length) : { disentanglement: 'undefined' as const, completeness: 'undefined' as const, informativeness: 'undefined' as const };
  return {
    samples,
    factors: varying.map((k) => factorsNames[k]),
    mig: four(m.mig),
    dci: { disentanglement: four(d.disentanglement), completeness: four(d.completeness), informativeness: four(d.informativeness) },
    method: `on the edits' responses: codes = random strengths U(−${RESPONSE_STRENGTH}, ${RESPONSE_STRENGTH}) σ of every direction at once, factors = change of each declared attribute; MIG: 20 equal-width bins, MI in nats (Chen et al. 2018); DCI: |standardised linear-regression coefficients| as importances, held-out R² as informativeness (Eastwood & Williams 2018); 'undefined' where the definition is (one code for MIG or completeness, one factor for disentanglement)`,
  };
}
