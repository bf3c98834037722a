// The audit as one job: runs the named steps in order — plan and sample probes (probes.ts), render
// and score each direction and pair (measure.ts), statistics, verdict and report
// (app/core/audit/) — as an async generator yielding progress between batches, so the scheduler
// can serve previews and cancel (cancel = stop pulling; native resources are released either way).
import { planAudit, auditWorkUnits, type AuditDirection, type AuditProgress, type ReferenceProbe } from '../../core/audit/plan.ts';
import type { AuditSettings } from '../../core/audit/settings.ts';
import { directionStatistics, combinationAllowance, combinationStatistics, nullPercentiles, nullSummary, significant, type DirectionStatistics, type InstrumentAllowance, type NullSummary } from '../../core/audit/statistics.ts';
import { judgeDirection, judgeCombination } from '../../core/audit/verdict.ts';
import { assembleReport, combinationReport, directionReport, instrumentCalibrationReport, tooFewProbes, type AuditReport, type CombinationReport, type DirectionReport } from '../../core/audit/report.ts';
import { ProbeBootstrap } from '../../core/stats.ts';
import { Random } from '../../core/random.ts';
import { directionSigma } from '../../core/latent.ts';
import { PUBLISHED_PPL_EPSILON, filteredMean, lerpPair, pathLengthUnits, percentileFilterBounds } from '../../core/audit/path-length.ts';
import type { ReferencePathLength } from '../../core/audit/report.ts';
import { TOOL_STAMP } from '../../protocol/version.ts';
import { resolveAttributes } from '../attributes.ts';
import type { Generator } from '../generator.ts';
import type { ScorerModel } from '../scorer-model.ts';
import type { DefinedAttribute } from '../defined-attributes.ts';
import { SsimDistanceModel } from '../distance-model.ts';
import { groundTruthMetrics } from '../lab.ts';
import { measureAttributeSpread, sampleProbes } from './probes.ts';
import { measureChangeMap, measureDirection, measureNullBaseline, measurePair, pairDistances, renderWorstProbes, type DirectionRun, type MeasureContext } from './measure.ts';
import type { DirectionMeasurements } from '../../core/audit/statistics.ts';
import type { AuditDirection as Direction } from '../../core/audit/plan.ts';
import type { Tick } from './probes.ts';
import { calibrateInstrument } from './calibrate.ts';
import { CROSSTALK_MULTIPLE, FLOOR_MULTIPLE, owningOperation } from '../../core/audit/calibration.ts';
import { CHANGE_MAP_FULL_SCALE, changeMapImage, consistencyAcrossProbes } from '../../core/audit/change-map.ts';
import { encodePng } from '../../core/image.ts';
import type { AttributeSpec } from '../attributes.ts';

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

/** The worst probes rendered, a reference probe named by its reference instead of a seed. */
async function renderedWorst(c: MeasureContext, d: Direction, chosen: Parameters<typeof renderWorstProbes>[2]) {
  const rendered = await renderWorstProbes(c, d, chosen);
  return rendered.map((w, i) => (chosen[i].index >= c.plan.seeds.length ? { ...w, seed: null, reference: c.plan.references[chosen[i].index - c.plan.seeds.length].name } : w));
}

/** The SSIM window is 11 × 11: smaller images use the JS distance (which pads). */
const SSIM_WINDOW = 11;

export interface AuditModels {
  /** User ONNX scorers whose attributes join the audit. */
  scorers?: ScorerModel[];
  /** Feature model for the 'features' path-length distance. */
  features?: ScorerModel;
  /** Attributes the lead defined from tagged seeds. */
  defined?: DefinedAttribute[];
  /** Reference latents added to the probe set after the seeds (the report's probes.references). */
  references?: ReferenceProbe[];
  /**
   * Renders and scores all directions and the null baseline elsewhere (a farm,
   * app/engine/farm/audit-units.ts) and returns one run per direction and one list of
   * measurements per null group, in order; by default each is measured here, in turn.
   */
  measure?: DirectionsMeasurer;
}

export type DirectionsMeasurer = (context: MeasureContext, directions: AuditDirection[], nullContext: MeasureContext, nullGroups: AuditDirection[][], tick: (label: string) => AuditProgress) => AsyncGenerator<AuditProgress, { runs: DirectionRun[]; nulls: DirectionMeasurements[][] }, void>;

export async function* runAudit(gen: Generator, directions: AuditDirection[], rawSettings: Partial<AuditSettings> = {}, models: AuditModels = {}): AsyncGenerator<AuditProgress, AuditReport, void> {
  const selection = rawSettings.attributes ?? 'default';
  const resolved = resolveAttributes(gen, selection, models.scorers ?? [], models.defined ?? []);
  const plan = planAudit(rawSettings, directions, gen.layout, resolved.map((s) => s.name), !!models.features, models.references ?? []);
  let done = 0;
  const probeBatches = Math.ceil(plan.probeCount / gen.batchSize);
  const total = auditWorkUnits(plan, directions.length, gen.batchSize) + layerRules(directions).length * plan.settings.nullDirections * probeBatches + Math.ceil(plan.settings.referencePathSamples / gen.batchSize);
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
  const ssimSpace = plan.distance === 'ssim' ? 'luma' : plan.distance === 'ssim-lab' ? 'lab' : null;
  const ssimModel = ssimSpace && Math.min(width, height) >= SSIM_WINDOW ? await SsimDistanceModel.create(height, width, gen.range, 1, ssimSpace) : null;
  try {
    const context: MeasureContext = { gen, plan, probes, specs, sigma, features: models.features, ssimModel };
    const bootstrap = new ProbeBootstrap(plan.probeCount, plan.settings.bootstrapResamples, plan.settings.seed);
    const reports: DirectionReport[] = [];
    const runs: DirectionRun[] = [];
    const leakCandidates = specs.map((s) => s.leak);
    // One entry per probe; a reference probe has no seed (NaN here, named by renderedWorst below).
    const probeSeeds = [...plan.seeds, ...plan.references.map(() => NaN)];
    const measured: { d: AuditDirection; run: DirectionRun; stats: DirectionStatistics; unmeasuredTarget: string | null; summary: NullSummary }[] = [];
    // Null baseline (METHODS §10): K random unit directions for each layer rule in use, with the
    // same σ scaling, probes and edit rule, measured at ±reference and, for path length, at the
    // probes themselves (strength 0: the end-point form), which every audited direction also has.
    // The unedited renders and scores are shared (measureNullBaseline); K is the caller's
    // (the CLI's default is 16, the app's APP_NULL_DIRECTIONS) and every report states it.
    const K = plan.settings.nullDirections;
    const nullPlan = { ...plan, grid: [-plan.reference, 0, plan.reference], pathLengthGrid: [0] };
    const nullContext: MeasureContext = { ...context, plan: nullPlan };
    const nullGroups = K > 0 ? layerRules(directions).map((layers) => ({ key: layerKey(layers), directions: nullDirections(gen, K, layers, plan.settings.seed) })) : [];
    // On a farm every render-and-score unit (directions and null baseline) is sent at once.
    const farmed = models.measure ? yield* models.measure(context, directions, nullContext, nullGroups.map((g) => g.directions), tick) : null;
    for (const [k, d] of directions.entries()) {
      // A farm's workers do not hold the probe images: the change map is made here.
      const run = farmed ? { ...farmed.runs[k], changeMap: await measureChangeMap(context, d) } : yield* measureDirection(context, d, tick);
      runs.push(run);
      const unmeasuredTarget = d.target && !names.includes(d.target) ? d.target : null;
      const stats = directionStatistics(run.measurements, plan, names, probeSeeds, unmeasuredTarget ? null : d.target, bootstrap, leakCandidates, instrument);
      measured.push({ d, run, stats, unmeasuredTarget, summary: nullSummary(run.measurements, plan) });
    }
    const nulls = new Map<string, NullSummary[]>();
    for (const [g, group] of nullGroups.entries()) {
      const runs = farmed ? farmed.nulls[g] : yield* measureNullBaseline(nullContext, group.directions, tick);
      nulls.set(group.key, runs.map((r) => nullSummary(r, nullPlan)));
    }
    for (const { d, run, stats, unmeasuredTarget, summary } of measured) {
      const nullRow = K > 0 && !unmeasuredTarget ? nullPercentiles(summary, names.indexOf(stats.target), nulls.get(layerKey(d.layers))!, leakCandidates) : null;
      const judged = judgeDirection(stats, { reference: plan.reference, settings: plan.settings, fewProbes: tooFewProbes(plan.probeCount), pathLengthGrid: plan.pathLengthGrid, nulls: nullRow, unmeasuredTarget });
      const targetChange = run.measurements.change[plan.grid.indexOf(plan.reference)]![names.indexOf(stats.target)];
      const changeMap = run.changeMap && { png: encodePng(changeMapImage(run.changeMap.map, run.changeMap.width, run.changeMap.height)), width: run.changeMap.width, height: run.changeMap.height, probes: run.changeMap.probes, fullScale: CHANGE_MAP_FULL_SCALE, meanDeltaE: significant(run.changeMap.meanDeltaE), shares: { subject: significant(run.changeMap.shares.subject), edge: significant(run.changeMap.shares.edge), background: significant(run.changeMap.shares.background) } };
      const consistency = consistencyAcrossProbes(targetChange);
      const roundedConsistency = { ...consistency, median: significant(consistency.median), mean: significant(consistency.mean), coefficientOfVariation: significant(consistency.coefficientOfVariation), flipShare: significant(consistency.flipShare) };
      reports.push(directionReport(d.name, stats, judged, plan, await renderedWorst(context, d, stats.worstProbes), nullRow, { changeMap, consistency: roundedConsistency, declaredTarget: d.target }));
    }
    const referencePathLength = plan.settings.referencePathSamples > 0 ? yield* publishedPathLength(context, plan.settings.referencePathSamples, tick) : null;
    const combinations: CombinationReport[] = [];
    for (const [ia, ib] of plan.pairs) {
      const [a, b] = [ia, ib].map((i) => ({ d: directions[i], scoresAtReference: runs[i].scoresAtReference }));
      const measured = yield* measurePair(context, a, b, tick);
      const atReference = (i: number) => runs[i].measurements.change[plan.grid.indexOf(plan.reference)]!.map((c) => {
        let sum = 0;
        let count = 0;
        for (const v of c) if (!Number.isNaN(v)) (sum += Math.abs(v)), count++;
        return count ? sum / count : NaN;
      });
      const allowance = combinationAllowance(names, instrument, atReference(ia), atReference(ib), leakCandidates);
      const stats = combinationStatistics(measured, names, plan.settings.bootstrapResamples, plan.settings.seed, allowance);
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
      nullBaseline: K > 0 ? { directions: K, rules: [...nulls.keys()], seed: plan.settings.seed } : null,
      referencePathLength,
      calibration: calibration && instrumentCalibrationReport(calibration, FLOOR_MULTIPLE, CROSSTALK_MULTIPLE, plan.settings),
      noSubject,
    });
  } finally {
    // Released however the audit ends: finished, cancelled (return()) or failed.
    await ssimModel?.dispose();
  }
}

/** Seeds of the published-form PPL pairs start here (apart from probes, σ samples and discovery). */
const REFERENCE_SEED_BASE = 0x58000000;
/** The second end of each pair is this many seeds further on. */
const REFERENCE_PAIR_OFFSET = 50_000_000;

const layerKey = (layers: [number, number] | null) => (layers ? `W+ rows ${layers[0]}–${layers[1] - 1}` : 'all rows');

/** The distinct layer rules of the audited directions, in first-seen order. */
function layerRules(directions: Direction[]): ([number, number] | null)[] {
  const seen = new Map<string, [number, number] | null>();
  for (const d of directions) if (!seen.has(layerKey(d.layers))) seen.set(layerKey(d.layers), d.layers);
  return [...seen.values()];
}

/**
 * K random unit directions drawn isotropically in W (normalised Gaussian vectors; seeded), applied
 * with `layers` like the audited directions that share that rule, each scaled by its own σ over
 * random latents (the same directionSigma the audited directions use).
 */
function nullDirections(gen: Generator, count: number, layers: [number, number] | null, seed: number): Direction[] {
  const size = gen.layout.size;
  const rng = new Random(seed, 0x4e11);
  return Array.from({ length: count }, (_, k) => {
    const v = rng.normals(size);
    const norm = Math.hypot(...v);
    const vector = v.map((x) => x / norm);
    const sigma = directionSigma(gen.centredSamples, size, vector, gen.layout.layers, layers);
    return { name: `null_${k}`, target: null, layers, vector, sigma: sigma > 0 ? sigma : 1 };
  });
}

/**
 * The generator's path length in the published form (Karras et al. 2019, METHODS §1.1–1.2): pairs
 * of random latents mapped to W, the end-point variant (t = 0) of lerp in W, ε = 1e-4 in units of
 * W, the 1st/99th-percentile filter, the mean with a bootstrap interval. The distance is the
 * audit's (the published one is LPIPS, which needs downloaded weights): named in the report.
 */
async function* publishedPathLength(c: MeasureContext, samples: number, tick: Tick): AsyncGenerator<AuditProgress, ReferencePathLength, void> {
  const { gen, plan } = c;
  const batch = gen.batchSize;
  const per = gen.layout.layers * gen.layout.size;
  const values = new Float64Array(samples);
  const first = REFERENCE_SEED_BASE + plan.settings.seed * 100_003;
  for (let at = 0; at < samples; at += batch) {
    const m = Math.min(batch, samples - at);
    const seeds = Array.from({ length: m }, (_, i) => first + at + i);
    const w1 = await gen.codesForSeeds(seeds, 1);
    const w2 = await gen.codesForSeeds(seeds.map((s) => s + REFERENCE_PAIR_OFFSET), 1);
    const a = new Float32Array(m * per);
    const b = new Float32Array(m * per);
    for (let i = 0; i < m; i++) {
      const [x, y] = lerpPair(w1.subarray(i * per, (i + 1) * per), w2.subarray(i * per, (i + 1) * per), 0);
      a.set(x, i * per);
      b.set(y, i * per);
    }
    const [ia, ib] = [await gen.synthesize(a, m), await gen.synthesize(b, m)];
    const d = await pairDistances(c, ia.images, ib.images, m);
    for (let i = 0; i < m; i++) values[at + i] = d[i] / PUBLISHED_PPL_EPSILON ** plan.exponent;
    yield tick('published-form path length');
  }
  const [lo, hi] = percentileFilterBounds(values);
  const kept = values.map((v) => (v >= lo && v <= hi ? 1 : 0));
  const sums = values.map((v, i) => v * kept[i]);
  const interval = samples >= 2 ? new ProbeBootstrap(samples, plan.settings.bootstrapResamples, plan.settings.seed + 2).interval([sums, kept], (mns) => mns[0] / mns[1]) : { value: filteredMean(values).mean, low: NaN, high: NaN };
  return {
    value: significant(interval.value),
    low: significant(interval.low),
    high: significant(interval.high),
    form: `published PPL (Karras et al. 2019): lerp in W, end points (t = 0), ε = ${PUBLISHED_PPL_EPSILON} in W, 1st/99th-percentile filter; distance ${plan.distance} in place of LPIPS, divided by ε^${plan.exponent}`,
    space: 'W',
    sampling: 'end',
    epsilon: PUBLISHED_PPL_EPSILON,
    distance: plan.distance,
    exponent: plan.exponent,
    units: pathLengthUnits(plan.distance, 'W'),
    samples,
    filtered: samples - kept.reduce((x, y) => x + y, 0),
  };
}
