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
import type { DefinedAttribute } from '../defined-attributes.ts';
import { SsimDistanceModel } from '../distance-model.ts';
import { groundTruthMetrics } from '../lab.ts';
import { measureAttributeSpread, sampleProbes } from './probes.ts';
import { calibrateInstrument } from './calibrate.ts';
import { CROSSTALK_MULTIPLE, FLOOR_MULTIPLE, owningOperation } from '../../core/audit/calibration.ts';
import { CHANGE_MAP_FULL_SCALE, changeMapImage, consistencyAcrossProbes } from '../../core/audit/change-map.ts';
import { significant, type InstrumentAllowance } from '../../core/audit/statistics.ts';
import { encodePng } from '../../core/image.ts';
import type { AttributeSpec } from '../attributes.ts';
import { measureDirection, measurePair, renderWorstProbes, type DirectionRun, type MeasureContext } from './measure.ts';

export type { AuditDirection, AuditProgress } from '../../core/audit/plan.ts';

/** Probes on which no subject separated (every position measure NaN), when the built-in measures are audited. */
function countNoSubject(specs: AttributeSpec[], baseScores: Float64Array): { probes: number; of: number } | null {
  const j = specs.findIndex((s) => s.source === 'image' && s.name === 'subject_x');
  if (j < 0) return null;
  const K = specs.length;
  const n = baseScores.length / K;
  let count = 0;
  for (let p = 0; p < n; p++) if (Number.isNaN(baseScores[p * K + j])) count++;
  return { probes: count, of: n };
}
export type { AuditReport } from '../../core/audit/report.ts';

/** The SSIM window is 11 × 11: smaller images use the JS distance (which pads). */
const SSIM_WINDOW = 11;

export interface AuditModels {
  /** User ONNX scorers whose attributes join the audit. */
  scorers?: ScorerModel[];
  /** Feature model for the 'features' path-length distance. */
  features?: ScorerModel;
  /** Attributes the lead defined from tagged seeds. */
  defined?: DefinedAttribute[];
}

export async function* runAudit(gen: Generator, directions: AuditDirection[], rawSettings: Partial<AuditSettings> = {}, models: AuditModels = {}): AsyncGenerator<AuditProgress, AuditReport, void> {
  const selection = rawSettings.attributes ?? 'default';
  const resolved = resolveAttributes(gen, selection, models.scorers ?? [], models.defined ?? []);
  const plan = planAudit(rawSettings, directions, gen.layout, resolved.map((s) => s.name), !!models.features);
  let done = 0;
  const total = auditWorkUnits(plan, directions.length, gen.batchSize);
  const tick = (label: string): AuditProgress => ({ done: ++done, total, label });

  const spread = yield* measureAttributeSpread(gen, plan, resolved, directions, tick);
  const { specs, sigma } = spread;
  const names = specs.map((s) => s.name);
  const probes = yield* sampleProbes(gen, plan, specs, tick);
  // Calibrate the instrument on the probes' own images: noise floor and cross-talk per measure.
  const calibration = await calibrateInstrument(probes.images, probes.baseScores, specs, sigma);
  const instrument: InstrumentAllowance | undefined = calibration
    ? {
        floor: names.map((n) => calibration.measures[n]?.noiseFloor ?? 0),
        crossTalk: (target) => {
          const op = owningOperation(target);
          return names.map((n) => (op ? calibration.measures[n]?.crossTalk[op.name] ?? 0 : 0));
        },
        floorMultiple: FLOOR_MULTIPLE,
        crossTalkMultiple: CROSSTALK_MULTIPLE,
      }
    : undefined;
  const noSubject = countNoSubject(specs, probes.baseScores);
  const { width, height } = gen.imageSize();
  const ssimModel = plan.distance === 'ssim' && Math.min(width, height) >= SSIM_WINDOW ? await SsimDistanceModel.create(height, width, gen.range, 1) : null;
  try {
    const context: MeasureContext = { gen, plan, probes, specs, sigma, features: models.features, ssimModel };
    const bootstrap = new ProbeBootstrap(plan.seeds.length, plan.settings.bootstrapResamples, plan.settings.seed);
    const reports: DirectionReport[] = [];
    const runs: DirectionRun[] = [];
    for (const d of directions) {
      const run = yield* measureDirection(context, d, tick);
      runs.push(run);
      const unmeasuredTarget = d.target && !names.includes(d.target) ? d.target : null;
      const stats = directionStatistics(run.measurements, plan, names, plan.seeds, unmeasuredTarget ? null : d.target, bootstrap, specs.map((s) => s.leak), instrument);
      const judged = judgeDirection(stats, { reference: plan.reference, settings: plan.settings, fewProbes: tooFewProbes(plan.seeds.length), pathLengthGrid: plan.pathLengthGrid, unmeasuredTarget });
      const targetChange = run.measurements.change[plan.grid.indexOf(plan.reference)]![names.indexOf(stats.target)];
      const changeMap = run.changeMap && { png: encodePng(changeMapImage(run.changeMap.map, run.changeMap.width, run.changeMap.height)), width: run.changeMap.width, height: run.changeMap.height, probes: run.changeMap.probes, fullScale: CHANGE_MAP_FULL_SCALE, meanDeltaE: significant(run.changeMap.meanDeltaE), shares: { subject: significant(run.changeMap.shares.subject), edge: significant(run.changeMap.shares.edge), background: significant(run.changeMap.shares.background) } };
      const consistency = consistencyAcrossProbes(targetChange);
      reports.push(directionReport(d.name, stats, judged, plan, await renderWorstProbes(context, d, stats.worstProbes), { changeMap, consistency: { ...consistency, median: significant(consistency.median), mean: significant(consistency.mean), coefficientOfVariation: significant(consistency.coefficientOfVariation), flipShare: significant(consistency.flipShare) }, declaredTarget: d.target }));
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
      attributes: specs.map((s, j) => ({ name: s.name, unit: s.unit, source: s.source, sigma: sigma[j], judged: s.leak, ...(s.defined ? { accuracy: s.defined.accuracy } : {}) })),
      warnings: spread.warnings,
      directions: reports,
      combinations,
      groundTruth,
      calibration: calibration && { ...calibration, floorMultiple: FLOOR_MULTIPLE, crossTalkMultiple: CROSSTALK_MULTIPLE },
      noSubject,
    });
  } finally {
    // Released however the audit ends: finished, cancelled (return()) or failed.
    await ssimModel?.dispose();
  }
}
