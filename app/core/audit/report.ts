// Audit step 5, the report: the shape of an audit report and its assembly from the other steps
// (plan, statistics, verdict, thumbnails). Worst-probe thumbnails are binary PNG (Uint8Array)
// throughout; they become data URIs only in the JSON file form (auditReportFile) and travel the
// protocol as separate binary thumbnails (auditReportWire).
import { AUDIT_CAUTION, MIN_USEFUL_PROBES, type AuditSettings } from './settings.ts';
import type { AuditPlan } from './plan.ts';
import { significant, type CombinationStatistics, type DirectionStatistics, type Interval, type WithinInstrument } from './statistics.ts';
import type { CombinationVerdict, DirectionVerdict, NullPercentiles } from './verdict.ts';
import { VERDICT_RULE } from './leakage.ts';
import { pathLengthUnits } from './path-length.ts';
import type { MeasureCalibration } from './calibration.ts';
import { blindMeasures, blindnessSentences, measureDetection, type BlindMeasure, type LeakThresholds, type MeasureDetection } from './detection.ts';
import type { Consistency, RegionShares } from './change-map.ts';

export type { Interval } from './statistics.ts';

export interface WorstProbe {
  /** The probe's seed; null for a reference probe, which `reference` names. */
  seed: number | null;
  reference?: string;
  strength: number;
  /** The attribute of the probe's own leak beyond the instrument; 'none' when nothing moves beyond it. */
  attribute: string;
  /** That leak, σ of the attribute (as the exceedance counts it). */
  leakage: number;
  /** PNG of the unedited probe. */
  before: Uint8Array;
  /** PNG of the probe at `strength`. */
  after: Uint8Array;
}

export interface DirectionReport {
  name: string;
  target: string;
  targetChosen: boolean;
  verdict: DirectionVerdict;
  reason: string;
  /** Which clause of the verdict rule decided (VERDICT_RULE). */
  decidedBy: string;
  targetEffect: Interval;
  dependency: Record<string, Interval>;
  leakage: DirectionStatistics['leakage'];
  exceedance: DirectionStatistics['exceedance'];
  /** Percentiles among the null (random) directions; null when the audit ran none. */
  nullBaseline: NullPercentiles | null;
  pathLength: Interval & { distance: string; epsilon: number; exponent: number; units: string; filtered: number };
  safeRange: [number, number];
  breaksAt: number | null;
  breaks: DirectionStatistics['breaks'];
  curves: { strengths: number[]; attributes: Record<string, { mean: number[]; low: number[]; high: number[] }> };
  leakageCurve: (number | null)[];
  leakageLower: (number | null)[];
  leakageUpper: (number | null)[];
  pathLengthCurve: { strengths: number[]; mean: number[]; low: number[]; high: number[] };
  worstProbes: WorstProbe[];
  /** Apparent leaks no larger than the instrument's noise floor or cross-talk: not counted as leaks. */
  withinInstrument: WithinInstrument[];
  /** Judged measures in which this audit cannot see a leak at a verdict threshold (detection.ts). */
  blind: BlindMeasure[];
  /** Per attribute, probes left out at +reference because it was not measurable there. */
  notMeasurable: Record<string, number>;
  /** Where the direction acts (METHODS §9.3), or null when no probe images were kept. */
  changeMap: ChangeMapReport | null;
  /** How consistently it moves its target across probes, at +reference. */
  consistency: Consistency;
}

export interface ChangeMapReport {
  /** PNG of the mean per-pixel CIEDE2000 at +reference (black 0 … white at fullScale) */
  png: Uint8Array;
  width: number;
  height: number;
  probes: number;
  fullScale: number;
  meanDeltaE: number;
  shares: RegionShares;
}

export interface InstrumentCalibrationReport {
  probes: number;
  operations: { invisible: string[]; exact: string[] };
  /** Per measure: noise floor and cross-talk, and the detection limit they give at this audit's thresholds. */
  measures: Record<string, MeasureCalibration & MeasureDetection>;
  floorMultiple: number;
  crossTalkMultiple: number;
}

/** The calibration as the report states it: each measure with its detection limit (floorMultiple × floor) and what that hides at these thresholds. */
export function instrumentCalibrationReport(c: { probes: number; operations: { invisible: string[]; exact: string[] }; measures: Record<string, MeasureCalibration> }, floorMultiple: number, crossTalkMultiple: number, thresholds: LeakThresholds): InstrumentCalibrationReport {
  const measures = Object.fromEntries(Object.entries(c.measures).map(([name, m]) => {
    const d = measureDetection(m.noiseFloor, floorMultiple, thresholds);
    return [name, { ...m, detectionLimit: significant(d.detectionLimit), blindTo: d.blindTo }];
  }));
  return { probes: c.probes, operations: c.operations, measures, floorMultiple, crossTalkMultiple };
}

/**
 * The report's warning about measures blind on this generator (none when every judged measure
 * can see a leak at the pass threshold): a pass says nothing about them.
 */
export function blindnessWarnings(calibration: InstrumentCalibrationReport | null, attributes: { name: string; judged?: boolean }[], thresholds: LeakThresholds): string[] {
  if (!calibration) return [];
  const judged = (name: string) => attributes.find((a) => a.name === name)?.judged !== false;
  const blind = blindMeasures(calibration.measures, calibration.floorMultiple, thresholds, judged);
  return (['fail', 'review'] as const).flatMap((level) => {
    const group = blind.filter((b) => b.blindTo === level);
    return blindnessSentences(group, thresholds).map((s) => `blind measures: ${s}; a pass does not clear ${group.length === 1 ? 'it' : 'them'}`);
  });
}

/** The generator's path length in the published form (Karras et al. 2019), as a reference row. */
export interface ReferencePathLength extends Interval {
  form: string;
  space: 'W';
  sampling: 'end' | 'full';
  epsilon: number;
  distance: string;
  exponent: number;
  units: string;
  samples: number;
  filtered: number;
}

/** The null baseline: K random unit directions per layer rule, measured like the real ones. */
export interface NullBaseline {
  directions: number;
  rules: string[];
  seed: number;
}

export interface CombinationReport {
  a: string;
  b: string;
  attribute: string;
  /** Largest non-additivity |a(both) − a(i) − a(j) + a(base)| / σ_a at +reference strength, mean over probes. */
  attributeInteraction: Interval;
  /** RMS of the mixed finite difference of images (METHODS §2.4) at ε = 1 σ, in image range units. */
  imageInteraction: Interval;
  verdict: CombinationVerdict;
}

/** MIG and DCI of the audited set against a generator's declared factors. */
export interface GroundTruthMetrics {
  samples: number;
  factors: string[];
  /** 'undefined' where the definition is (one code for MIG or completeness, one factor for disentanglement). */
  mig: number | 'undefined';
  dci: { disentanglement: number | 'undefined'; completeness: number | 'undefined'; informativeness: number | 'undefined' };
  method: string;
}

export interface AuditReport {
  format: 'plumbline.audit';
  version: 1;
  createdAt: string;
  tool: string;
  generator: { name: string; fingerprint: string };
  settings: AuditSettings;
  /** count includes the references, which follow the seeds (each with the image SHA-256 it was found from). */
  probes: { count: number; pinned: number[]; firstSeed: number | null; psi: number; references: { name: string; imageSha256: string | null; latentSha256: string }[] };
  /** `accuracy`: a defined attribute's cross-validated accuracy in words (reported wherever it is used);
   * `judged`: false for a composite or descriptor that is reported but never a leak candidate. */
  attributes: { name: string; unit: string; source: string; sigma: number; judged?: boolean; accuracy?: string }[];
  warnings: string[];
  caution: string;
  directions: DirectionReport[];
  combinations: CombinationReport[];
  /** MIG and DCI of the audited set against the generator's declared factors, when it declares any. */
  groundTruth: GroundTruthMetrics | null;
  nullBaseline: NullBaseline | null;
  referencePathLength: ReferencePathLength | null;
  /** The pass / review / fail rule the verdicts applied, in words. */
  verdictRule: string[];
  /** The instrument's own noise floor and cross-talk per measure on this probe set (null when nothing could be calibrated). */
  calibration: InstrumentCalibrationReport | null;
  /** Probes on which no subject separated from the background (built-in measures only). */
  noSubject: { probes: number; of: number } | null;
}

/** One direction's report from its statistics, verdict and rendered worst probes. */
export function directionReport(
  name: string,
  stats: DirectionStatistics,
  judged: { verdict: DirectionVerdict; reason: string; decidedBy?: string },
  plan: Pick<AuditPlan, 'distance' | 'epsilon' | 'exponent'>,
  worstProbes: WorstProbe[],
  nullBaseline: NullPercentiles | null = null,
  extra: { changeMap?: ChangeMapReport | null; consistency?: Consistency; declaredTarget?: string | null } = {},
): DirectionReport {
  return {
    name,
    // A target with no measure keeps its declared name (the verdict says it has no measure).
    target: judged.verdict === 'no-measure' && extra.declaredTarget ? extra.declaredTarget : stats.target,
    // A no-measure direction named its target; it was only not measured.
    targetChosen: judged.verdict === 'no-measure' ? false : stats.targetChosen,
    verdict: judged.verdict,
    reason: judged.reason,
    decidedBy: judged.decidedBy ?? '',
    targetEffect: stats.targetEffect,
    dependency: stats.dependency,
    leakage: stats.leakage,
    exceedance: stats.exceedance,
    nullBaseline,
    pathLength: { ...stats.pathLength, distance: plan.distance, epsilon: plan.epsilon, exponent: plan.exponent, units: pathLengthUnits(plan.distance) },
    safeRange: stats.safeRange,
    breaksAt: stats.breaksAt,
    breaks: stats.breaks,
    curves: stats.curves,
    leakageCurve: stats.leakageCurve,
    leakageLower: stats.leakageLower,
    leakageUpper: stats.leakageUpper,
    pathLengthCurve: stats.pathLengthCurve,
    worstProbes,
    withinInstrument: stats.withinInstrument ?? [],
    blind: stats.blind ?? [],
    notMeasurable: stats.notMeasurable ?? {},
    changeMap: extra.changeMap ?? null,
    consistency: extra.consistency ?? { probes: 0, median: NaN, mean: NaN, coefficientOfVariation: NaN, flipShare: NaN },
  };
}

export function combinationReport(a: string, b: string, stats: CombinationStatistics, verdict: CombinationVerdict): CombinationReport {
  return { a, b, attribute: stats.attribute, attributeInteraction: stats.attributeInteraction, imageInteraction: stats.imageInteraction, verdict };
}

export function assembleReport(x: {
  plan: AuditPlan;
  tool: string;
  generator: { name: string; fingerprint: string };
  /** `accuracy`: a defined attribute's cross-validated accuracy in words (reported wherever it is used);
   * `judged`: false for a composite or descriptor that is reported but never a leak candidate. */
  attributes: { name: string; unit: string; source: string; sigma: number; judged?: boolean; accuracy?: string }[];
  /** Warnings found while sampling (added after the plan's). */
  warnings: string[];
  directions: DirectionReport[];
  combinations: CombinationReport[];
  groundTruth: GroundTruthMetrics | null;
  nullBaseline?: NullBaseline | null;
  referencePathLength?: ReferencePathLength | null;
  calibration?: InstrumentCalibrationReport | null;
  noSubject?: { probes: number; of: number } | null;
  createdAt?: Date;
}): AuditReport {
  const { plan } = x;
  const settings = plan.settings;
  return {
    format: 'plumbline.audit',
    version: 1,
    createdAt: (x.createdAt ?? new Date()).toISOString(),
    tool: x.tool,
    generator: { name: x.generator.name, fingerprint: x.generator.fingerprint },
    settings,
    probes: { count: plan.probeCount, pinned: settings.pinnedSeeds, firstSeed: plan.seeds[settings.pinnedSeeds.length] ?? plan.seeds[0] ?? null, psi: settings.psi, references: plan.references.map((r) => ({ name: r.name, imageSha256: r.imageSha256, latentSha256: r.latentSha256 })) },
    attributes: x.attributes.map((a) => ({ name: a.name, unit: a.unit, source: a.source, sigma: significant(a.sigma, 6), ...(a.judged === false ? { judged: false } : {}), ...(a.accuracy ? { accuracy: a.accuracy } : {}) })),
    warnings: [...plan.warnings, ...x.warnings, ...blindnessWarnings(x.calibration ?? null, x.attributes, settings)],
    caution: AUDIT_CAUTION,
    directions: x.directions,
    combinations: x.combinations,
    groundTruth: x.groundTruth,
    nullBaseline: x.nullBaseline ?? null,
    referencePathLength: x.referencePathLength ?? null,
    verdictRule: VERDICT_RULE,
    calibration: x.calibration ?? null,
    noSubject: x.noSubject ?? null,
  };
}

/** Whether a probe set this small may pass anything (see MIN_USEFUL_PROBES). */
export const tooFewProbes = (count: number) => count < MIN_USEFUL_PROBES;

/** The report as a JSON file holds it: thumbnails inline as PNG data URIs so the file stands alone. */
export function auditReportFile(report: AuditReport) {
  const dataUri = (png: Uint8Array) => `data:image/png;base64,${Buffer.from(png).toString('base64')}`;
  return { ...report, directions: report.directions.map((d) => ({ ...d, changeMap: d.changeMap && { ...d.changeMap, png: dataUri(d.changeMap.png) }, worstProbes: d.worstProbes.map((w) => ({ ...w, before: dataUri(w.before), after: dataUri(w.after) })) })) };
}

/** The report as the protocol carries it: worst probes without images, the images as a separate binary list. */
export function auditReportWire(report: AuditReport) {
  const thumbnails = report.directions.flatMap((d) => d.worstProbes.map((w) => ({ direction: d.name, ...w })));
  const changeMaps = report.directions.flatMap((d) => (d.changeMap ? [{ direction: d.name, png: d.changeMap.png }] : []));
  const wire = { ...report, directions: report.directions.map((d) => ({ ...d, changeMap: d.changeMap && (({ png: _png, ...rest }) => rest)(d.changeMap), worstProbes: d.worstProbes.map(({ before: _before, after: _after, ...rest }) => rest) })) };
  return { report: wire, thumbnails, changeMaps };
}
