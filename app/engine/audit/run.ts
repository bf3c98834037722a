// The audit as one job: runs the named steps in order — plan and sample probes (probes.ts), render
// and score each direction and pair (measure.ts), statistics, verdict and report
// (app/core/audit/) — as an async generator yielding progress between batches, so the scheduler
// can serve previews and cancel (cancel = stop pulling; native resources are released either way).
import { planAudit, auditWorkUnits, type AuditDirection, type AuditProgress } from '../../core/audit/plan.ts';
import type { AuditSettings } from '../../core/audit/settings.ts';
import { directionStatistics, combinationStatistics } from '../../core/audit/statistics.ts';
import { judgeDirection, judgeCombination } from '../../core/audit/verdict.ts';
import { assembleReport, combinationReport, directionReport, tooFewProbes, type AuditReport, type CombinationReport, type DirectionReport } from '../../core/audit/report.ts';
import { ProbeBootstrap } from '../../core/stats.ts';
import { TOOL_STAMP } from '../../protocol/version.ts';
import { resolveAttributes } from '../attributes.ts';
import type { Generator } from '../generator.ts';
import type { ScorerModel } from '../scorer-model.ts';
import { SsimDistanceModel } from '../distance-model.ts';
import { groundTruthMetrics } from '../lab.ts';
import { measureAttributeSpread, sampleProbes } from './probes.ts';
import { measureDirection, measurePair, renderWorstProbes, type DirectionRun, type MeasureContext } from './measure.ts';

export type { AuditDirection, AuditProgress } from '../../core/audit/plan.ts';
export type { AuditReport } from '../../core/audit/report.ts';

/** The SSIM window is 11 × 11: smaller images use the JS distance (which pads). */
const SSIM_WINDOW = 11;

export interface AuditModels {
  /** User ONNX scorers whose attributes join the audit. */
  scorers?: ScorerModel[];
  /** Feature model for the 'features' path-length distance. */
  features?: ScorerModel;
  /**
   * Renders and scores all directions elsewhere (a farm, app/engine/farm/farm-audit.ts) and
   * returns one run per direction, in order; by default each is measured here, in turn.
   */
  measure?: DirectionsMeasurer;
}

export type DirectionsMeasurer = (context: MeasureContext, directions: AuditDirection[], tick: (label: string) => AuditProgress) => AsyncGenerator<AuditProgress, DirectionRun[], void>;

export async function* runAudit(gen: Generator, directions: AuditDirection[], rawSettings: Partial<AuditSettings> = {}, models: AuditModels = {}): AsyncGenerator<AuditProgress, AuditReport, void> {
  const selection = rawSettings.attributes ?? 'default';
  const resolved = resolveAttributes(gen, selection, models.scorers ?? []);
  const plan = planAudit(rawSettings, directions, gen.layout, resolved.map((s) => s.name), !!models.features);
  let done = 0;
  const total = auditWorkUnits(plan, directions.length, gen.batchSize);
  const tick = (label: string): AuditProgress => ({ done: ++done, total, label });

  const spread = yield* measureAttributeSpread(gen, plan, resolved, directions, tick);
  const { specs, sigma } = spread;
  const names = specs.map((s) => s.name);
  const probes = yield* sampleProbes(gen, plan, specs, tick);
  const { width, height } = gen.imageSize();
  const ssimModel = plan.distance === 'ssim' && Math.min(width, height) >= SSIM_WINDOW ? await SsimDistanceModel.create(height, width, gen.range, 1) : null;
  try {
    const context: MeasureContext = { gen, plan, probes, specs, sigma, features: models.features, ssimModel };
    const bootstrap = new ProbeBootstrap(plan.seeds.length, plan.settings.bootstrapResamples, plan.settings.seed);
    const reports: DirectionReport[] = [];
    const runs: DirectionRun[] = [];
    const measured = models.measure ? yield* models.measure(context, directions, tick) : null;
    for (const [k, d] of directions.entries()) {
      const run = measured ? measured[k] : yield* measureDirection(context, d, tick);
      runs.push(run);
      const stats = directionStatistics(run.measurements, plan, names, plan.seeds, d.target, bootstrap);
      const judged = judgeDirection(stats, { reference: plan.reference, settings: plan.settings, fewProbes: tooFewProbes(plan.seeds.length), pathLengthGrid: plan.pathLengthGrid });
      reports.push(directionReport(d.name, stats, judged, plan, await renderWorstProbes(context, d, stats.worstProbes)));
    }
    const combinations: CombinationReport[] = [];
    for (const [ia, ib] of plan.pairs) {
      const [a, b] = [ia, ib].map((i) => ({ d: directions[i], scoresAtReference: runs[i].scoresAtReference }));
      const measured = yield* measurePair(context, a, b, tick);
      const stats = combinationStatistics(measured, names, plan.settings.bootstrapResamples, plan.settings.seed);
      combinations.push(combinationReport(a.d.name, b.d.name, stats, judgeCombination(stats)));
    }
    const groundTruth = plan.settings.groundTruthSamples > 0 && gen.attributeNames.length ? await groundTruthMetrics(gen, directions, plan.settings.groundTruthSamples, plan.settings.seed) : null;
    return assembleReport({
      plan,
      tool: TOOL_STAMP,
      generator: gen.info,
      attributes: specs.map((s, j) => ({ name: s.name, unit: s.unit, source: s.source, sigma: sigma[j] })),
      warnings: spread.warnings,
      directions: reports,
      combinations,
      groundTruth,
    });
  } finally {
    // Released however the audit ends: finished, cancelled (return()) or failed.
    await ssimModel?.dispose();
  }
}
