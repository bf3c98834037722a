// Audits on a farm: the render-and-score step (measure.ts's measureDirection) sharded into
// (direction × probe chunk) units, every strength of the grid in each. The coordinator keeps the
// probe sampling, the attribute spread, the statistics, the verdicts and the report; units carry
// the exact probe codes and base scores (as raw bytes), so each worker computes what one machine
// would, batch for batch, and the merged measurements equal the single-machine ones bit for bit.
import { z } from 'zod';
import type { SandboxedJob } from 'bullmq';
import type { AuditDirection, AuditPlan, AuditProgress } from '../../core/audit/plan.ts';
import { PlumblineError } from '../../core/errors.ts';
import { resolveAttributes, type AttributeSelection } from '../attributes.ts';
import { SsimDistanceModel } from '../distance-model.ts';
import { measureDirection, type DirectionRun, type MeasureContext } from '../audit/measure.ts';
import type { DirectionsMeasurer } from '../audit/run.ts';
import type { Farm, FarmUnit } from './coordinator.ts';
import { modelRefSchema } from './protocol.ts';
import type { FarmRunOptions } from './farm-variants.ts';

/** Probes per unit, in batches: chunks start on batch boundaries, so batches match one machine's. */
export const BATCHES_PER_AUDIT_UNIT = 4;
const SSIM_WINDOW = 11;

const base64 = z.string().regex(/^[A-Za-z0-9+/]*={0,2}$/);

export const auditUnitDataSchema = z.object({
  kind: z.literal('audit'),
  runId: z.string(),
  unitName: z.string(),
  model: modelRefSchema,
  plan: z.record(z.string(), z.unknown()),
  selection: z.union([z.enum(['default', 'card', 'image', 'all']), z.array(z.string())]),
  attributes: z.array(z.string()).min(1),
  sigma: z.array(z.number()),
  direction: z.object({ name: z.string(), target: z.string().nullable(), layers: z.tuple([z.number().int(), z.number().int()]).nullable(), vector: base64, sigma: z.number() }),
  at: z.number().int().min(0),
  seeds: z.array(z.number().int()).min(1),
  /** Float32 probe codes of the chunk, little-endian bytes. */
  codes: base64,
  /** Float64 unedited scores of the chunk, [probe × attribute]. */
  baseScores: base64,
  batch: z.number().int().positive(),
});
export type AuditUnitData = z.infer<typeof auditUnitDataSchema>;

export const auditUnitResultSchema = z.object({
  kind: z.literal('audit'),
  worker: z.string(),
  seconds: z.number().nonnegative(),
  imagesRendered: z.number().int().nonnegative(),
  direction: z.string(),
  at: z.number().int().min(0),
  count: z.number().int().positive(),
  /** Per grid strength (null at 0), per attribute: Float64 Δ/σ of each probe in the chunk. */
  change: z.array(z.array(base64).nullable()),
  /** Per path-length strength: Float64 path length of each probe in the chunk. */
  pathLength: z.array(base64),
  scoresAtReference: base64,
});
export type AuditUnitResult = z.infer<typeof auditUnitResultSchema>;

const toBase64 = (a: Float32Array | Float64Array) => Buffer.from(a.buffer, a.byteOffset, a.byteLength).toString('base64');
function float64(b64: string, length: number, what: string): Float64Array {
  const bytes = Buffer.from(b64, 'base64');
  if (bytes.length !== length * 8) throw new Error(`${what}: ${bytes.length / 8} values, expected ${length}`);
  const out = new Float64Array(length);
  new Uint8Array(out.buffer).set(bytes);
  return out;
}
function float32(b64: string): Float32Array {
  const bytes = Buffer.from(b64, 'base64');
  const out = new Float32Array(bytes.length / 4);
  new Uint8Array(out.buffer).set(bytes);
  return out;
}

export function isAuditUnit(data: unknown): boolean {
  return (data as { kind?: string } | null)?.kind === 'audit';
}

/** Worker side: one unit, with a cancel check and a progress report between batches. */
export async function auditUnit(job: SandboxedJob, worker: string, load: (data: AuditUnitData) => Promise<import('../generator.ts').Generator>, checkCancelled: (runId: string) => Promise<void>): Promise<AuditUnitResult> {
  const data = auditUnitDataSchema.parse(job.data);
  const started = performance.now();
  await checkCancelled(data.runId);
  const gen = await load(data);
  gen.batchSize = data.batch;
  const plan = data.plan as unknown as AuditPlan;
  const all = resolveAttributes(gen, data.selection as AttributeSelection, []);
  const specs = data.attributes.map((name) => {
    const s = all.find((x) => x.name === name);
    if (!s) throw new PlumblineError('farm', `worker ${worker}: attribute '${name}' is not available here (only built-in attributes can be audited on a farm)`);
    return s;
  });
  const m = data.seeds.length;
  const K = specs.length;
  const baseScores = float64(data.baseScores, m * K, 'base scores');
  const { width, height } = gen.imageSize();
  const ssimModel = plan.distance === 'ssim' && Math.min(width, height) >= SSIM_WINDOW ? await SsimDistanceModel.create(height, width, gen.range, 1) : null;
  let images = 0;
  try {
    const context: MeasureContext = { gen, plan, probes: { seeds: data.seeds, codes: float32(data.codes), baseScores }, specs, sigma: data.sigma, ssimModel };
    const direction: AuditDirection = { ...data.direction, vector: float32(data.direction.vector) };
    let done = 0;
    const steps = measureDirection(context, direction, (label) => ({ done: ++done, total: 0, label }));
    let run: DirectionRun;
    for (;;) {
      const step = await steps.next();
      if (step.done) {
        run = step.value;
        break;
      }
      await job.updateProgress({ worker, done, label: step.value.label });
      await checkCancelled(data.runId);
    }
    // Images rendered: one per probe at each nonzero strength, one ε further at each path-length
    // strength, and the unedited image at 0 when 0 is a path-length strength.
    images = m * (plan.grid.filter((s) => s !== 0).length + plan.pathLengthGrid.length + (plan.pathLengthGrid.includes(0) ? 1 : 0));
    return {
      kind: 'audit', worker, seconds: (performance.now() - started) / 1000, imagesRendered: images, direction: direction.name, at: data.at, count: m,
      change: run.measurements.change.map((c) => (c ? c.map(toBase64) : null)),
      pathLength: run.measurements.pathLength.map(toBase64),
      scoresAtReference: toBase64(run.scoresAtReference),
    };
  } finally {
    await ssimModel?.dispose();
  }
}

/** Coordinator side: a measurer for runAudit that sends every direction's probe chunks to the farm. */
export function farmAuditMeasurer(farm: Farm, selection: AttributeSelection, o: FarmRunOptions & { fingerprint: string; files: string[] }): DirectionsMeasurer {
  return async function* (c: MeasureContext, directions: AuditDirection[], tick: (label: string) => AuditProgress) {
    const { gen, plan, probes, specs, sigma } = c;
    const n = probes.seeds.length;
    const K = specs.length;
    const per = gen.layout.layers * gen.layout.size;
    const chunk = gen.batchSize * BATCHES_PER_AUDIT_UNIT;
    const units: FarmUnit[] = [];
    const where = new Map<FarmUnit, { k: number; at: number; m: number }>();
    const planData = JSON.parse(JSON.stringify(plan)) as Record<string, unknown>;
    directions.forEach((d, k) => {
      for (let at = 0; at < n; at += chunk) {
        const m = Math.min(chunk, n - at);
        const unit: FarmUnit = {
          name: `audit ${d.name} probes ${at}…${at + m - 1}`,
          data: {
            kind: 'audit', plan: planData, selection, attributes: specs.map((s) => s.name), sigma,
            direction: { name: d.name, target: d.target, layers: d.layers, vector: toBase64(d.vector), sigma: d.sigma },
            at, seeds: probes.seeds.slice(at, at + m), codes: toBase64(probes.codes.subarray(at * per, (at + m) * per)),
            baseScores: toBase64(probes.baseScores.subarray(at * K, (at + m) * K)), batch: gen.batchSize,
          },
        };
        units.push(unit);
        where.set(unit, { k, at, m });
      }
    });
    const runs: DirectionRun[] = directions.map(() => ({
      measurements: { change: plan.grid.map((s) => (s === 0 ? null : specs.map(() => new Float64Array(n)))), pathLength: plan.pathLengthGrid.map(() => new Float64Array(n)) },
      scoresAtReference: new Float64Array(n * K),
    }));
    const merged: FarmUnit[] = [];
    const decoded = new Map<FarmUnit, { change: (Float64Array[] | null)[]; pathLength: Float64Array[]; scores: Float64Array }>();
    const check = (unit: FarmUnit, r: AuditUnitResult) => {
      const { k, at, m } = where.get(unit)!;
      if (r.direction !== directions[k].name || r.at !== at || r.count !== m) throw new Error(`answers ${r.direction} probes ${r.at}…${r.at + r.count - 1}, not this unit`);
      if (r.change.length !== plan.grid.length || r.pathLength.length !== plan.pathLengthGrid.length) throw new Error(`${r.change.length} strengths and ${r.pathLength.length} path-length strengths, expected ${plan.grid.length} and ${plan.pathLengthGrid.length}`);
      const change = r.change.map((c, gi) => {
        if ((c === null) !== (plan.grid[gi] === 0)) throw new Error(`strength ${plan.grid[gi]}: ${c === null ? 'missing' : 'unexpected'} attribute changes`);
        if (c && c.length !== K) throw new Error(`strength ${plan.grid[gi]}: ${c.length} attributes, expected ${K}`);
        return c ? c.map((b, j) => float64(b, m, `change at ${plan.grid[gi]} of ${specs[j].name}`)) : null;
      });
      const pathLength = r.pathLength.map((b, pi) => float64(b, m, `path length at ${plan.pathLengthGrid[pi]}`));
      const scores = float64(r.scoresAtReference, m * K, 'scores at the reference strength');
      for (const a of [...change.flatMap((c) => c ?? []), ...pathLength, scores]) for (const v of a) if (Number.isNaN(v)) throw new Error('NaN in the measurements');
      decoded.set(unit, { change, pathLength, scores });
      return r.imagesRendered;
    };
    const accept = (unit: FarmUnit) => {
      const { k, at } = where.get(unit)!;
      const d = decoded.get(unit)!;
      const run = runs[k];
      d.change.forEach((c, gi) => c?.forEach((values, j) => run.measurements.change[gi]![j].set(values, at)));
      d.pathLength.forEach((values, pi) => run.measurements.pathLength[pi].set(values, at));
      run.scoresAtReference.set(d.scores, at * K);
      decoded.delete(unit);
      merged.push(unit);
    };
    // Progress in the audit's own units: the batches each finished unit stands for.
    const batchesPerUnit = (m: number) => (plan.grid.filter((s) => s !== 0).length + plan.pathLengthGrid.length) * Math.ceil(m / gen.batchSize);
    let counted = 0;
    const run = farm.run({
      kind: 'audit', label: `audit of ${directions.map((d) => d.name).join(', ')}`, units, schema: auditUnitResultSchema, check,
      model: { fingerprint: o.fingerprint, files: o.files, path: o.modelPath, mappingPath: o.mappingPath }, publish: o.publish, isCancelled: o.isCancelled,
    }, accept);
    for await (const p of run) {
      o.onProgress?.(p);
      let last: AuditProgress | null = null;
      for (; counted < merged.length; counted++) for (let b = 0; b < batchesPerUnit(where.get(merged[counted])!.m); b++) last = tick(`auditing on the farm (${p.done}/${p.total} units)`);
      if (last) yield last;
    }
    return runs;
  };
}
