// Audit step 1 (its pure half), the plan: checks the settings and directions against the
// generator's latent layout and the audited attributes, and fixes the probe seeds, the σ-sample
// seeds, the strength grid, the path-length grid and the pairs to combine. Nothing here renders;
// the engine's sampleProbes (app/engine/audit/probes.ts) renders what the plan names.
import { PlumblineError } from '../errors.ts';
import { MIN_USEFUL_PROBES, auditSettingsSchema, type AuditSettings } from './settings.ts';
import { DISTANCE_EXPONENT } from './path-length.ts';

/** What the audit needs of a direction: its vector, W+ rows, σ and optional target attribute. */
export interface AuditDirection {
  name: string;
  target: string | null;
  layers: [number, number] | null;
  vector: Float32Array;
  sigma: number;
}

export interface AuditProgress {
  done: number;
  total: number;
  label: string;
}

export interface AuditPlan {
  settings: AuditSettings;
  /** Pinned seeds first, then the seeded random probes. */
  seeds: number[];
  /** Seeds of the separate ψ = 1 sample that measures each attribute's spread σ. */
  sigmaSeeds: number[];
  /** Strengths in σ units, sorted, always containing 0 and ±reference. */
  grid: number[];
  /** The integer strengths of the grid, where path length is measured. */
  pathLengthGrid: number[];
  reference: number;
  epsilon: number;
  distance: AuditSettings['pathLength']['distance'];
  /** Growth exponent of the distance for small steps: path length = d / ε^exponent. */
  exponent: number;
  /** Pairs of direction indices to check for additivity. */
  pairs: [number, number][];
  /** Probes used by the combination check. */
  pairProbes: number;
  warnings: string[];
}

/** Probe seeds start here so they differ from the seeds a user browses first. */
const PROBE_SEED_BASE = 0x70000000;
const SIGMA_SEED_BASE = 0x60000000;
/** Spreads one audit seed's probe set far from the next seed's. */
const SEED_STRIDE = 100_003;
/** Combination checks run on at most this many probes (4 extra renders per pair and probe). */
const PAIR_PROBES = 32;
/** 'all' combinations pair at most this many directions (66 pairs). */
const MAX_PAIRED_DIRECTIONS = 12;

/**
 * Validates and fixes everything an audit will do. `latentSize` and `latentLayers` describe the
 * generator's latent layout; `attributes` are the names the audit will score.
 */
export function planAudit(rawSettings: Partial<AuditSettings>, directions: AuditDirection[], latent: { size: number; layers: number }, attributes: string[], hasFeatureModel: boolean): AuditPlan {
  const settings = auditSettingsSchema.parse(rawSettings);
  if (settings.pathLength.distance === 'features' && !hasFeatureModel) throw new PlumblineError('bad-request', "the 'features' path-length distance needs a scorer card with a features output (--feature-scorer)");
  if (directions.length === 0) throw new PlumblineError('bad-request', 'no directions to audit');
  const per = latent.layers * latent.size;
  for (const d of directions) {
    if (d.vector.length !== latent.size && d.vector.length !== per) {
      throw new PlumblineError('latent-size-mismatch', `direction '${d.name}' has ${d.vector.length} values; this generator's latent size is ${latent.size}`);
    }
  }
  for (const d of directions) {
    if (d.target && !attributes.includes(d.target)) throw new PlumblineError('bad-request', `direction '${d.name}' targets unknown attribute '${d.target}'; audited attributes: ${attributes.join(', ')}`);
  }
  const seeds = [...settings.pinnedSeeds, ...Array.from({ length: settings.probes }, (_, i) => PROBE_SEED_BASE + settings.seed * SEED_STRIDE + i)];
  if (seeds.length === 0) throw new PlumblineError('bad-request', 'the probe set is empty: ask for --probes N or pin some seeds');
  if (seeds.length < 2) throw new PlumblineError('bad-request', 'an audit needs at least 2 probes for any interval');
  const warnings: string[] = [];
  if (seeds.length < MIN_USEFUL_PROBES) warnings.push(`only ${seeds.length} probes: intervals will be wide and the verdicts unreliable; use at least ${MIN_USEFUL_PROBES} (100 or more before sign-off)`);

  const grid = [...new Set([...settings.strengths, 0])].sort((a, b) => a - b);
  const reference = settings.referenceStrength;
  if (!grid.includes(reference) || !grid.includes(-reference)) throw new PlumblineError('bad-request', `the strength grid must contain ±${reference} (the reference strength)`);
  const distance = settings.pathLength.distance;
  return {
    settings,
    seeds,
    sigmaSeeds: Array.from({ length: settings.sigmaSamples }, (_, i) => SIGMA_SEED_BASE + settings.seed * SEED_STRIDE + i),
    grid,
    pathLengthGrid: grid.filter((t) => Number.isInteger(t)),
    reference,
    epsilon: settings.pathLength.epsilon,
    distance,
    // Squared feature distances are quadratic for small steps, like LPIPS: exponent 2.
    exponent: distance === 'features' ? 2 : DISTANCE_EXPONENT[distance],
    pairs: choosePairs(directions, settings.combinations),
    pairProbes: Math.min(seeds.length, PAIR_PROBES),
    warnings,
  };
}

/** Progress units of a whole audit: one per rendered batch (five per pair batch). */
export function auditWorkUnits(plan: AuditPlan, directionCount: number, batchSize: number): number {
  const batches = Math.ceil(plan.seeds.length / batchSize);
  const sigmaBatches = Math.ceil(plan.sigmaSeeds.length / batchSize);
  return sigmaBatches + batches + directionCount * (plan.grid.length - 1 + plan.pathLengthGrid.length) * batches + plan.pairs.length * Math.ceil(plan.pairProbes / batchSize) * 5;
}

function choosePairs(directions: AuditDirection[], which: AuditSettings['combinations']): [number, number][] {
  if (which === 'none' || directions.length < 2) return [];
  if (which === 'all') {
    const count = Math.min(directions.length, MAX_PAIRED_DIRECTIONS);
    const out: [number, number][] = [];
    for (let i = 0; i < count; i++) for (let j = i + 1; j < count; j++) out.push([i, j]);
    return out;
  }
  return which.map(([a, b]) => {
    const ia = directions.findIndex((d) => d.name === a);
    const ib = directions.findIndex((d) => d.name === b);
    if (ia < 0 || ib < 0) throw new PlumblineError('bad-request', `combination ${a} + ${b}: unknown direction`);
    return [ia, ib];
  });
}
