// Audit step 1 (its rendering half), sampling: measures each attribute's spread σ over a separate
// ψ = 1 sample (dropping attributes that never vary when the user did not name them), then maps
// the plan's probe seeds (and reference latents, after them) to latent codes and scores each
// unedited probe once for the whole audit.
import { createHash } from 'node:crypto';
import { PlumblineError } from '../../core/errors.ts';
import { RunningMoments } from '../../core/stats.ts';
import type { AuditDirection, AuditPlan, AuditProgress, ReferenceProbe } from '../../core/audit/plan.ts';
import { IMAGE_MEASURES, attributeChange, scoreBatch, type AttributeSpec } from '../attributes.ts';
import type { Generator } from '../generator.ts';
import type { RgbaImage } from '../../core/image.ts';
import { CALIBRATION_PROBES } from '../../core/audit/calibration.ts';

/** A spread at or below this counts as zero variance. */
const ZERO_SPREAD = 1e-12;

export interface AttributeSpread {
  /** The attributes the audit keeps (those that vary). */
  specs: AttributeSpec[];
  /** σ of each kept attribute over the random sample. */
  sigma: number[];
  warnings: string[];
}

export interface ProbeSet {
  seeds: number[];
  /** Every probe: the seeds, then the plan's reference latents. */
  count: number;
  /** Latent codes of the probes, [probe × layers × size]. */
  codes: Float32Array;
  /** Unedited scores, [probe × attribute] in spec order. */
  baseScores: Float64Array;
  /** Images of the first CALIBRATION_PROBES probes (for calibration and change maps). */
  images: RgbaImage[];
}

/** `tick` advances the audit's progress by one batch. */
export type Tick = (label: string) => AuditProgress;

export async function* measureAttributeSpread(gen: Generator, plan: AuditPlan, specs: AttributeSpec[], directions: AuditDirection[], tick: Tick): AsyncGenerator<AuditProgress, AttributeSpread, void> {
  const K = specs.length;
  const batch = gen.batchSize;
  const moments = specs.map(() => new RunningMoments());
  // Circular attributes: spread of the wrapped difference from the first sample measurable in them.
  const reference: (Float64Array | undefined)[] = [];
  const unmeasurable = new Array<number>(K).fill(0);
  for (let at = 0; at < plan.sigmaSeeds.length; at += batch) {
    const out = await gen.renderSeeds(plan.sigmaSeeds.slice(at, at + batch), 1, []);
    const s = await scoreBatch(gen, out, specs);
    for (let i = 0; i < out.n; i++) {
      const row = s.subarray(i * K, (i + 1) * K);
      for (let j = 0; j < K; j++) {
        if (Number.isNaN(row[j])) {
          unmeasurable[j]++;
          continue;
        }
        if (specs[j].period || specs[j].periodFrom !== undefined) {
          if (!reference[j]) reference[j] = Float64Array.from(row);
          moments[j].push(attributeChange(specs, j, reference[j]!, row));
        } else moments[j].push(row[j]);
      }
    }
    yield tick('measuring attribute spread');
  }
  const warnings: string[] = [];
  specs.forEach((spec, j) => {
    if (unmeasurable[j]) warnings.push(`${spec.name} is not measurable on ${unmeasurable[j]} of ${plan.sigmaSeeds.length} random samples${spec.source === 'image' && IMAGE_MEASURES[spec.index].undefinedWhen ? ` (${IMAGE_MEASURES[spec.index].undefinedWhen})` : ''}; those are left out of its statistics`);
  });
  const sigma = moments.map((m) => m.std);
  // A measure kept only to give another its period (orientation's harmonic order) is never normalised.
  const periodSources = new Set(specs.flatMap((x) => (x.periodFrom !== undefined ? [x.periodFrom] : [])));
  const zero = specs.filter((_, j) => !(sigma[j] > ZERO_SPREAD) && !periodSources.has(j)).map((s) => s.name);
  for (const j of periodSources) if (!(sigma[j] > ZERO_SPREAD)) sigma[j] = 1;
  if (!zero.length) return { specs, sigma, warnings };
  const problem = `attribute(s) ${zero.join(', ')} do not vary over ${plan.sigmaSeeds.length} random samples (zero variance), so changes cannot be normalised`;
  // Asked for by name: an error. Part of a default set: left out, and the report says so.
  if (Array.isArray(plan.settings.attributes) || specs.length === zero.length) throw new PlumblineError('bad-request', `${problem}; leave them out with --attributes`);
  const keep = specs.map((_, j) => j).filter((j) => !zero.includes(specs[j].name));
  const kept = keep.map((j) => ({ ...specs[j], periodFrom: specs[j].periodFrom === undefined ? undefined : keep.indexOf(specs[j].periodFrom!) }));
  for (const d of directions) {
    if (d.target && specs.some((s) => s.name === d.target) && !kept.some((s) => s.name === d.target)) throw new PlumblineError('bad-request', `direction '${d.name}' targets ${d.target}, which does not vary over the random samples`);
  }
  return { specs: kept, sigma: keep.map((j) => sigma[j]), warnings: [...warnings, `${problem}; they were left out of this audit (more --sigma samples may reveal rare variation)`] };
}

/** A latent as a reference probe, named, with the SHA-256 of its float32 values (little-endian, as stored in .npy). */
export function referenceProbe(name: string, latent: Float32Array, imageSha256: string | null): ReferenceProbe {
  const latentSha256 = createHash('sha256').update(new Uint8Array(latent.buffer, latent.byteOffset, latent.byteLength)).digest('hex');
  return { name, imageSha256, latentSha256, latent: Float32Array.from(latent) };
}

export async function* sampleProbes(gen: Generator, plan: AuditPlan, specs: AttributeSpec[], tick: Tick): AsyncGenerator<AuditProgress, ProbeSet, void> {
  const n = plan.probeCount;
  const K = specs.length;
  const batch = gen.batchSize;
  const { layers, size } = gen.layout;
  const per = layers * size;
  const codes = new Float32Array(n * per);
  codes.set(await gen.codesForSeeds(plan.seeds, plan.settings.psi));
  // Reference latents as stored: a W code on every row, a W+ code row by row.
  plan.references.forEach((r, i) => {
    const at = (plan.seeds.length + i) * per;
    if (r.latent.length === per) codes.set(r.latent, at);
    else for (let l = 0; l < layers; l++) codes.set(r.latent, at + l * size);
  });
  const baseScores = new Float64Array(n * K);
  const images: RgbaImage[] = [];
  const keep = Math.min(n, CALIBRATION_PROBES);
  for (let at = 0; at < n; at += batch) {
    const m = Math.min(batch, n - at);
    const out = await gen.synthesize(codes.slice(at * per, (at + m) * per), m);
    baseScores.set(await scoreBatch(gen, out, specs), at * K);
    for (let i = 0; i < m && images.length < keep; i++) images.push(gen.toRgba(out.images, i));
    yield tick('rendering probes');
  }
  return { seeds: plan.seeds, count: n, codes, baseScores, images };
}
