// Latent-code arithmetic: seeds to codes, truncation, W → W+, and applying direction edits.
// Conventions: truncation w' = c + ψ(w − c) (the usual "truncation trick"); an edit adds
// strength · σ_d · d to the rows in its layer range, after truncation, so strength is in units of
// the direction's spread over random samples (σ units).
import { latentForSeed } from './random.ts';

export interface LatentShape {
  layers: number;
  size: number;
}

export interface EditVector {
  /** size values (one direction for every row) or layers·size values (per-row, W+). */
  vector: Float32Array;
  /** Half-open row range [start, end); null means every row. */
  layers: [number, number] | null;
  /** strength · σ_d, the latent step length. */
  step: number;
}

/** A direction as an edit needs it: its vector, its W+ rows and its spread σ over random samples. */
export interface ScaledDirection {
  vector: Float32Array;
  layers: [number, number] | null;
  sigma: number;
}

/** The one definition of a slider edit: `strength` σ units along d, i.e. a latent step of strength · σ_d. */
export function directionEdit(d: ScaledDirection, strength: number): EditVector {
  return { vector: d.vector, layers: d.layers, step: strength * d.sigma };
}

export function seedsToZ(seeds: number[], size: number): Float32Array {
  const out = new Float32Array(seeds.length * size);
  seeds.forEach((s, i) => out.set(latentForSeed(s, size), i * size));
  return out;
}

export function truncate(codes: Float32Array, centre: Float32Array, psi: number): Float32Array {
  const out = new Float32Array(codes.length);
  const d = centre.length;
  for (let i = 0; i < codes.length; i++) out[i] = centre[i % d] + psi * (codes[i] - centre[i % d]);
  return out;
}

/** [N, size] → [N, layers, size] by repeating each code on every row. */
export function broadcastLayers(codes: Float32Array, shape: LatentShape): Float32Array {
  const n = codes.length / shape.size;
  const out = new Float32Array(n * shape.layers * shape.size);
  for (let i = 0; i < n; i++) {
    const row = codes.subarray(i * shape.size, (i + 1) * shape.size);
    for (let l = 0; l < shape.layers; l++) out.set(row, (i * shape.layers + l) * shape.size);
  }
  return out;
}

/** Adds edits in place to [N, layers, size] codes. */
export function applyEdits(codes: Float32Array, shape: LatentShape, edits: EditVector[]): Float32Array {
  const { layers, size } = shape;
  const n = codes.length / (layers * size);
  for (const e of edits) {
    if (e.step === 0) continue;
    const perRow = e.vector.length === layers * size;
    if (!perRow && e.vector.length !== size) throw new RangeError(`edit vector has ${e.vector.length} values; expected ${size} or ${layers * size}`);
    const [a, b] = e.layers ?? [0, layers];
    for (let i = 0; i < n; i++)
      for (let l = Math.max(0, a); l < Math.min(layers, b); l++) {
        const base = (i * layers + l) * size;
        const vb = perRow ? l * size : 0;
        for (let k = 0; k < size; k++) codes[base + k] += e.step * e.vector[vb + k];
      }
  }
  return codes;
}

/** Std over samples [M, size] of the projection (w − mean)·d summed over the direction's active rows. */
export function directionSigma(samples: Float32Array, size: number, vector: Float32Array, layerCount: number, layers: [number, number] | null): number {
  const m = samples.length / size;
  const perRow = vector.length === layerCount * size;
  const [a, b] = layers ?? [0, layerCount];
  // A single-row vector moves every active row by one unit along d, and rows coincide in W, so
  // the projection is (w − mean)·d; a per-row (W+) vector projects through the sum of its active rows.
  const eff = new Float64Array(size);
  if (!perRow) for (let k = 0; k < size; k++) eff[k] = vector[k];
  else for (let l = Math.max(0, a); l < Math.min(layerCount, b); l++) for (let k = 0; k < size; k++) eff[k] += vector[l * size + k];
  let s = 0;
  let s2 = 0;
  for (let i = 0; i < m; i++) {
    let p = 0;
    for (let k = 0; k < size; k++) p += samples[i * size + k] * eff[k];
    s += p;
    s2 += p * p;
  }
  const mean = s / m;
  const variance = Math.max(0, s2 / m - mean * mean) * (m / (m - 1));
  return Math.sqrt(variance);
}

export function normalize(v: Float32Array): Float32Array {
  let n = 0;
  for (const x of v) n += x * x;
  n = Math.sqrt(n);
  if (!(n > 0)) throw new RangeError('cannot normalise a zero vector');
  return v.map((x) => x / n);
}
