// Audits on a farm: the render-and-score steps (measure.ts's measureDirection and
// measureNullBaseline) sharded into (direction × probe chunk) units, every strength of the grid in
// each, and (null group × probe chunk) units for the null baseline. The coordinator keeps the
// probe sampling, the attribute spread, the statistics, the verdicts and the report; units carry
// the exact probe codes and base scores (as raw bytes), so each worker computes what one machine
// would, batch for batch, and the merged measurements equal the single-machine ones bit for bit.
import { z } from 'zod';
import type { SandboxedJob } from 'bullmq';
import type { AuditDirection, AuditPlan, AuditProgress } from '../../core/audit/plan.ts';
import { PlumblineError } from '../../core/errors.ts';
import { resolveAttributes, type AttributeSelection } from '../attributes.ts';
import { SsimDistanceModel } from '../distance-model.ts';
import { measureDirection, measureNullBaseline, type DirectionRun, type MeasureContext } from '../audit/measure.ts';
import type { DirectionMeasurements } from '../../core/audit/statistics.ts';
import type { DirectionsMeasurer } from '../audit/run.ts';
import type { Farm, FarmUnit } from './coordinator.ts';
import { modelRefSchema } from './protocol.ts';
import type { FarmRunOptions } from './farm-variants.ts';

/** Probes per unit, in batches: chunks start on batch boundaries, so batches match one machine's. */
export const BATCHES_PER_AUDIT_UNIT = 4;
const SSIM_WINDOW = 11;

const base64 = z.string().regex(/^[A-Za-z0-9+/]*={0,2}$/);

const directionSchema = z.object({ name: z.string(), target: z.string().nullable(), layers: z.tuple([z.number().int(), z.number().int()]).nullable(), vector: base64, sigma: z.number() });

export const auditUnitDataSchema = z.object({
  kind: z.literal('audit'),
  runId: z.string(),
  unitName: z.string(),
  model: modelRefSchema,
  /**
   * 'direction': one audited direction over the plan's whole grid (measureDirection);
   * 'nulls': the null baseline's random directions of one layer rule on its ±reference grid
   * (measureNullBaseline, which shares each batch's unedited render among them).
   */
  role: z.enum(['direction', 'nulls']),
  plan: z.record(z.string(), z.unknown()),
  selection: z.union([z.enum(['default', 'card', 'image', 'all']), z.array(z.string())]),
  attributes: z.array(z.string()).min(1),
  sigma: z.array(z.number()),
  directions: z.array(directionSchema).min(1),
  at: z.number().int().min(0),
  seeds: z.array(z.number().int()).min(1),
  /** Float32 probe codes of the chunk, little-endian bytes. */
  codes: base64,
  /** Float64 unedited scores of the chunk, [probe × attribute]. */
  baseScores: base64,
  batch: z.number().int().positive(),
});
export type AuditUnitData = z.infer<typeof auditUnitDataSchema>;

const measurementsSchema = z.object({
  /** Per grid strength (null at 0), per attribute: Float64 Δ/σ of each probe in the chunk. */
  change: z.array(z.array(base64).nullable()),
  /** Per path-length strength: Float64 path length of each probe in the chunk. */
  pathLength: z.array(base64),
});

export const auditUnitResultSchema = z.object({
  kind: z.literal('audit'),
  worker: z.string(),
  seconds: z.number().nonnegative(),
  imagesRendered: z.number().int().nonnegative(),
  role: z.enum(['direction', 'nulls']),
  /** The directions measured, in the unit's order. */
  directions: z.array(z.string()).min(1),
  at: z.number().int().min(0),
  count: z.number().int().positive(),
  measurements: z.array(measurementsSchema).min(1),
  /** Float64 scores at +reference, [probe × attribute]; audited directions only. */
  scoresAtReference: base64.nullable(),
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

/**
 * The native SSIM model of this worker process, kept between units (creating an ONNX session per
 * unit would cost more than a small unit's renders); rebuilt when the image geometry changes.
 */
let ssimCache: { key: string; model: SsimDistanceModel } | null = null;
async function ssimFor(plan: AuditPlan, gen: import('../generator.ts').Generator): Promise<SsimDistanceModel | null> {
  const { width, height } = gen.imageSize();
  const space = plan.distance === 'ssim' ? 'luma' : plan.distance === 'ssim-lab' ? 'lab' : null;
  if (!space || Math.min(width, height) < SSIM_WINDOW) return null;
  const key = JSON.stringify([height, width, gen.range, space]);
  if (ssimCache?.key === key) return ssimCache.model;
  await ssimCache?.model.dispose();
  ssimCache = null;
  const model = await SsimDistanceModel.create(height, width, gen.range, 1, space);
  ssimCache = { key, model };
  return model;
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
  const ssimModel = await ssimFor(plan, gen);
  const context: MeasureContext = { gen, plan, probes: { seeds: data.seeds, count: data.seeds.length, codes: float32(data.codes), baseScores, images: [] }, specs, sigma: data.sigma, ssimModel };
  const directions: AuditDirection[] = data.directions.map((d) => ({ ...d, vector: float32(d.vector) }));
  let done = 0;
  const tick = (label: string) => ({ done: ++done, total: 0, label });
  // Progress and the cancel check between batches, as the steps of one machine's audit yield.
  async function drive<T>(steps: AsyncGenerator<AuditProgress, T, void>): Promise<T> {
    for (;;) {
      const step = await steps.next();
      if (step.done) return step.value;
      await job.updateProgress({ worker, done, label: step.value.label });
      await checkCancelled(data.runId);
    }
  }
  if (data.role === 'direction') {
    if (directions.length !== 1) throw new PlumblineError('farm', `worker ${worker}: a direction unit holds one direction, not ${directions.length}`);
    const run: DirectionRun = await drive(measureDirection(context, directions[0], tick));
    // Images rendered: one per probe at each nonzero strength, one ε further at each path-length
    // strength, and the unedited image at 0 when 0 is a path-length strength.
    const images = m * (plan.grid.filter((s) => s !== 0).length + plan.pathLengthGrid.length + (plan.pathLengthGrid.includes(0) ? 1 : 0));
    return {
      kind: 'audit', worker, seconds: (performance.now() - started) / 1000, imagesRendered: images, role: 'direction', directions: [directions[0].name], at: data.at, count: m,
      measurements: [{ change: run.measurements.change.map((c) => (c ? c.map(toBase64) : null)), pathLength: run.measurements.pathLength.map(toBase64) }],
      scoresAtReference: toBase64(run.scoresAtReference),
    };
  }
  const runs: DirectionMeasurements[] = await drive(measureNullBaseline(context, directions, tick));
  // Per batch: the unedited render once, then ±reference and one ε step for every random direction.
  const images = m * (1 + 3 * directions.length);
  return {
    kind: 'audit', worker, seconds: (performance.now() - started) / 1000, imagesRendered: images, role: 'nulls', directions: directions.map((d) => d.name), at: data.at, count: m,
    measurements: runs.map((r) => ({ change: r.change.map((c) => (c ? c.map(toBase64) : null)), pathLength: r.pathLength.map(toBase64) })),
    scoresAtReference: null,
  };
}

/** Coordinator side: a measurer for runAudit that sends every direction's and every null group's probe chunks to the farm. */
export function farmAuditMeasurer(farm: Farm, selection: AttributeSelection, o: FarmRunOptions & { fingerprint: string; files: string[] }): DirectionsMeasurer {
  return async function* (c: MeasureContext, directions: AuditDirection[], nullContext: MeasureContext, nullGroups: AuditDirection[][], tick: (label: string) => AuditProgress) {
    const { gen, plan, probes, specs, sigma } = c;
    // Workers rebuild probes from seeds: a reference set (latents the project holds) stays on this machine.
    if (plan.references.length) throw new PlumblineError('bad-request', 'an audit with a reference set runs on this machine only: disconnect the farm or leave the references out');
    const n = probes.seeds.length;
    const K = specs.length;
    const per = gen.layout.layers * gen.layout.size;
    const chunk = gen.batchSize * BATCHES_PER_AUDIT_UNIT;
    const wire = (d: AuditDirection) => ({ name: d.name, target: d.target, layers: d.layers, vector: toBase64(d.vector), sigma: d.sigma });
    // Each job: the directions a unit measures, on which plan; its measurements land in `into`.
    type Target = { role: 'direction' | 'nulls'; plan: AuditPlan; directions: AuditDirection[]; into: DirectionMeasurements[]; scores: Float64Array | null };
    const emptyRun = (p: AuditPlan): DirectionMeasurements => ({ change: p.grid.map((s) => (s === 0 ? null : specs.map(() => new Float64Array(n)))), pathLength: p.pathLengthGrid.map(() => new Float64Array(n)) });
    const runs: DirectionRun[] = directions.map(() => ({ measurements: emptyRun(plan), scoresAtReference: new Float64Array(n * K), changeMap: null }));
    const nulls: DirectionMeasurements[][] = nullGroups.map((g) => g.map(() => emptyRun(nullContext.plan)));
    const targets: Target[] = [
      ...directions.map((d, k): Target => ({ role: 'direction', plan, directions: [d], into: [runs[k].measurements], scores: runs[k].scoresAtReference })),
      ...nullGroups.map((g, k): Target => ({ role: 'nulls', plan: nullContext.plan, directions: g, into: nulls[k], scores: null })),
    ];
    const units: FarmUnit[] = [];
    const where = new Map<FarmUnit, { t: Target; at: number; m: number }>();
    for (const t of targets) {
      const planData = JSON.parse(JSON.stringify(t.plan)) as Record<string, unknown>;
      const what = t.role === 'direction' ? t.directions[0].name : `null baseline (${t.directions.length} random directions, ${t.directions[0].layers ? `W+ rows ${t.directions[0].layers[0]}–${t.directions[0].layers[1] - 1}` : 'all rows'})`;
      for (let at = 0; at < n; at += chunk) {
        const m = Math.min(chunk, n - at);
        const unit: FarmUnit = {
          name: `audit ${what} probes ${at}…${at + m - 1}`,
          data: {
            kind: 'audit', role: t.role, plan: planData, selection, attributes: specs.map((s) => s.name), sigma,
            directions: t.directions.map(wire),
            at, seeds: probes.seeds.slice(at, at + m), codes: toBase64(probes.codes.subarray(at * per, (at + m) * per)),
            baseScores: toBase64(probes.baseScores.subarray(at * K, (at + m) * K)), batch: gen.batchSize,
          },
        };
        units.push(unit);
        where.set(unit, { t, at, m });
      }
    }
    const merged: FarmUnit[] = [];
    const decoded = new Map<FarmUnit, { measurements: { change: (Float64Array[] | null)[]; pathLength: Float64Array[] }[]; scores: Float64Array | null }>();
    const check = (unit: FarmUnit, r: AuditUnitResult) => {
      const { t, at, m } = where.get(unit)!;
      const names = t.directions.map((d) => d.name);
      if (r.role !== t.role || r.directions.join('\n') !== names.join('\n') || r.at !== at || r.count !== m) throw new Error(`answers ${r.role} ${r.directions.join(', ')} probes ${r.at}…${r.at + r.count - 1}, not this unit`);
      if (r.measurements.length !== names.length) throw new Error(`${r.measurements.length} measurement sets, expected ${names.length}`);
      const p = t.plan;
      const measurements = r.measurements.map((x) => {
        if (x.change.length !== p.grid.length || x.pathLength.length !== p.pathLengthGrid.length) throw new Error(`${x.change.length} strengths and ${x.pathLength.length} path-length strengths, expected ${p.grid.length} and ${p.pathLengthGrid.length}`);
        const change = x.change.map((cs, gi) => {
          if ((cs === null) !== (p.grid[gi] === 0)) throw new Error(`strength ${p.grid[gi]}: ${cs === null ? 'missing' : 'unexpected'} attribute changes`);
          if (cs && cs.length !== K) throw new Error(`strength ${p.grid[gi]}: ${cs.length} attributes, expected ${K}`);
          return cs ? cs.map((b, j) => float64(b, m, `change at ${p.grid[gi]} of ${specs[j].name}`)) : null;
        });
        const pathLength = x.pathLength.map((b, pi) => float64(b, m, `path length at ${p.pathLengthGrid[pi]}`));
        return { change, pathLength };
      });
      if ((r.scoresAtReference === null) !== (t.scores === null)) throw new Error(`scores at the reference strength ${r.scoresAtReference === null ? 'missing' : 'unexpected'}`);
      const scores = r.scoresAtReference === null ? null : float64(r.scoresAtReference, m * K, 'scores at the reference strength');
      for (const a of [...measurements.flatMap((x) => [...x.change.flatMap((cs) => cs ?? []), ...x.pathLength]), ...(scores ? [scores] : [])]) for (const v of a) if (Number.isNaN(v)) throw new Error('NaN in the measurements');
      decoded.set(unit, { measurements, scores });
      return r.imagesRendered;
    };
    const accept = (unit: FarmUnit) => {
      const { t, at } = where.get(unit)!;
      const d = decoded.get(unit)!;
      d.measurements.forEach((x, k) => {
        const into = t.into[k];
        x.change.forEach((cs, gi) => cs?.forEach((values, j) => into.change[gi]![j].set(values, at)));
        x.pathLength.forEach((values, pi) => into.pathLength[pi].set(values, at));
      });
      if (d.scores) t.scores!.set(d.scores, at * K);
      decoded.delete(unit);
      merged.push(unit);
    };
    // Progress in the audit's own units: the batches each finished unit stands for (as one
    // machine ticks: per nonzero strength and path-length strength, or per random direction).
    const batchesPerUnit = (u: FarmUnit) => {
      const { t, m } = where.get(u)!;
      const b = Math.ceil(m / gen.batchSize);
      return t.role === 'direction' ? (plan.grid.filter((s) => s !== 0).length + plan.pathLengthGrid.length) * b : t.directions.length * b;
    };
    let counted = 0;
    const run = farm.run({
      kind: 'audit', label: `audit of ${directions.map((d) => d.name).join(', ')}`, units, schema: auditUnitResultSchema, check,
      model: { fingerprint: o.fingerprint, files: o.files, path: o.modelPath, mappingPath: o.mappingPath }, publish: o.publish, isCancelled: o.isCancelled, onNote: o.onNote,
    }, accept);
    for await (const p of run) {
      o.onProgress?.(p);
      let last: AuditProgress | null = null;
      for (; counted < merged.length; counted++) for (let b = 0; b < batchesPerUnit(merged[counted]); b++) last = tick(`auditing on the farm (${p.done}/${p.total} units)`);
      if (last) yield last;
    }
    return { runs, nulls };
  };
}
