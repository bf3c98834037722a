// Audit step 1 (its rendering half), sampling: measures each attribute's spread σ over a separate
// ψ = 1 sample (dropping attributes that never vary when the user did not name them), then maps
// the plan's probe seeds to latent codes and scores each unedited probe once for the whole audit.
import { PlumblineError } from '../../core/errors.ts';
import { RunningMoments } from '../../core/stats.ts';
import type { AuditDirection, AuditPlan, AuditProgress } from '../../core/audit/plan.ts';
import { attributeDelta, scoreBatch, type AttributeSpec } from '../attributes.ts';
import type { Generator } from '../generator.ts';

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
  /** Latent codes of the probes, [probe × layers × size]. */
  codes: Float32Array;
  /** Unedited scores, [probe × attribute] in spec order. */
  baseScores: Float64Array;
}

/** `tick` advances the audit's progress by one batch. */
export type Tick = (label: string) => AuditProgress;

export async function* measureAttributeSpread(gen: Generator, plan: AuditPlan, specs: AttributeSpec[], directions: AuditDirection[], tick: Tick): AsyncGenerator<AuditProgress, AttributeSpread, void> {
  const K = specs.length;
  const batch = gen.batchSize;
  const moments = specs.map(() => new RunningMoments());
  const circularReference: number[] = [];
  for (let at = 0; at < plan.sigmaSeeds.length; at += batch) {
    const out = await gen.renderSeeds(plan.sigmaSeeds.slice(at, at + batch), 1, []);
    const s = await scoreBatch(gen, out, specs);
    for (let i = 0; i < out.n; i++)
      for (let j = 0; j < K; j++) {
        // Circular attributes: spread of the wrapped difference from the first sample.
        if (specs[j].period) {
          if (circularReference[j] === undefined) circularReference[j] = s[j];
          moments[j].push(attributeDelta(circularReference[j], s[i * K + j], specs[j].period));
        } else moments[j].push(s[i * K + j]);
      }
    yield tick('measuring attribute spread');
  }
  const sigma = moments.map((m) => m.std);
  const zero = specs.filter((_, j) => !(sigma[j] > ZERO_SPREAD)).map((s) => s.name);
  if (!zero.length) return { specs, sigma, warnings: [] };
  const problem = `attribute(s) ${zero.join(', ')} do not vary over ${plan.sigmaSeeds.length} random samples (zero variance), so changes cannot be normalised`;
  // Asked for by name: an error. Part of a default set: left out, and the report says so.
  if (Array.isArray(plan.settings.attributes) || specs.length === zero.length) throw new PlumblineError('bad-request', `${problem}; leave them out with --attributes`);
  const keep = specs.map((_, j) => j).filter((j) => sigma[j] > ZERO_SPREAD);
  const kept = keep.map((j) => specs[j]);
  for (const d of directions) {
    if (d.target && !kept.some((s) => s.name === d.target)) throw new PlumblineError('bad-request', `direction '${d.name}' targets ${d.target}, which does not vary over the random samples`);
  }
  return { specs: kept, sigma: keep.map((j) => sigma[j]), warnings: [`${problem}; they were left out of this audit (more --sigma samples may reveal rare variation)`] };
}

export async function* sampleProbes(gen: Generator, plan: AuditPlan, specs: AttributeSpec[], tick: Tick): AsyncGenerator<AuditProgress, ProbeSet, void> {
  const n = plan.seeds.length;
  const K = specs.length;
  const batch = gen.batchSize;
  const per = gen.layout.layers * gen.layout.size;
  const codes = await gen.codesForSeeds(plan.seeds, plan.settings.psi);
  const baseScores = new Float64Array(n * K);
  for (let at = 0; at < n; at += batch) {
    const m = Math.min(batch, n - at);
    const out = await gen.synthesize(codes.slice(at * per, (at + m) * per), m);
    baseScores.set(await scoreBatch(gen, out, specs), at * K);
    yield tick('rendering probes');
  }
  return { seeds: plan.seeds, codes, baseScores };
}
