// Direction lab operations that need the generator: sampling codes with attribute scores,
// discovery by each method, boundaries and repair. Each result carries a provenance record.
import { readFileSync } from 'node:fs';
import { PlumblineError } from '../core/errors.ts';
import { differenceOfMeans, linearBoundary, pcaDirections, projectOff, sefaDirections } from '../core/discovery/methods.ts';
import { decodeModel } from '../core/onnx/inspect.ts';
import { latentWeights } from '../core/onnx/trace.ts';
import { dci, mig } from '../core/metrics.ts';
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
    const column = Float64Array.from({ length: samples }, (_, i) => scores[i * K + j]);
    const r = linearBoundary(codes, gen.layout.size, column, { fraction, seed });
    return {
      name: `boundary_${spec.name}`,
      target: spec.name,
      layers: null,
      vector: r.vector,
      sigma: gen.sigmaOf(r.vector, null),
      notes: `linear SVM boundary for ${spec.name}: ${r.perSide} samples per side, held-out accuracy ${(r.accuracy * 100).toFixed(1)}%`,
      source: provenance(gen, 'boundary', { attribute: spec.name, fraction, perSide: r.perSide, heldOutAccuracy: r.accuracy, whitened: true }, samples, seed),
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

/**
 * MIG and DCI of a set of directions against the generator's declared factors (its card's
 * attribute outputs): each direction's code is the projection of a sample's centred latent onto it.
 */
export async function groundTruthMetrics(gen: Generator, directions: { name: string; vector: Float32Array }[], samples = 2000, seed = 1) {
  const factorsNames = gen.attributeNames;
  if (!factorsNames.length) return null;
  const J = directions.length;
  const K = factorsNames.length;
  const { seeds, codes: w } = await sampleCodes(gen, samples, seed + 7);
  const size = gen.layout.size;
  const codes = new Float64Array(samples * J);
  for (let i = 0; i < samples; i++)
    directions.forEach((d, j) => {
      let s = 0;
      for (let k = 0; k < size; k++) s += (w[i * size + k] - gen.centre[k]) * d.vector[k % d.vector.length];
      codes[i * J + j] = s;
    });
  const factors = new Float64Array(samples * K);
  for (let at = 0; at < samples; at += gen.batchSize) {
    const out = await gen.renderSeeds(seeds.slice(at, at + gen.batchSize), 1, []);
    if (out.attributes) factors.set(out.attributes, at * K);
  }
  // Factors that never vary carry no information and would make H(v) = 0.
  const varying = factorsNames.map((_, k) => k).filter((k) => {
    let lo = Infinity;
    let hi = -Infinity;
    for (let i = 0; i < samples; i++) {
      lo = Math.min(lo, factors[i * K + k]);
      hi = Math.max(hi, factors[i * K + k]);
    }
    return hi > lo;
  });
  const F = new Float64Array(samples * varying.length);
  for (let i = 0; i < samples; i++) varying.forEach((k, c) => (F[i * varying.length + c] = factors[i * K + k]));
  const m = J >= 2 ? mig(codes, J, F, varying.length) : null;
  const d = dci(codes, J, F, varying.length);
  return {
    samples,
    factors: varying.map((k) => factorsNames[k]),
    mig: m ? Number(m.mig.toFixed(4)) : null,
    dci: { disentanglement: Number(d.disentanglement.toFixed(4)), completeness: Number(d.completeness.toFixed(4)), informativeness: Number(d.informativeness.toFixed(4)) },
    method: 'MIG: 20 equal-width bins, MI in nats (Chen et al. 2018); DCI: |standardised linear-regression coefficients| as importances, held-out R² as informativeness (Eastwood & Williams 2018)',
  };
}
