// Audit step 5, the report: the shape of an audit report and its assembly from the other steps
// (plan, statistics, verdict, thumbnails). Worst-probe thumbnails are binary PNG (Uint8Array)
// throughout; they become data URIs only in the JSON file form (auditReportFile) and travel the
// protocol as separate binary thumbnails (auditReportWire).
import { AUDIT_CAUTION, MIN_USEFUL_PROBES, type AuditSettings } from './settings.ts';
import type { AuditPlan } from './plan.ts';
import { significant, type CombinationStatistics, type DirectionStatistics, type Interval } from './statistics.ts';
import type { CombinationVerdict, DirectionVerdict } from './verdict.ts';

export type { Interval } from './statistics.ts';

export interface WorstProbe {
  seed: number;
  strength: number;
  attribute: string;
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
  targetEffect: Interval;
  dependency: Record<string, Interval>;
  leakage: Interval & { strength: number; attribute: string };
  pathLength: Interval & { distance: string; epsilon: number; exponent: number };
  safeRange: [number, number];
  breaksAt: number | null;
  curves: { strengths: number[]; attributes: Record<string, { mean: number[]; low: number[]; high: number[] }> };
  leakageCurve: (number | null)[];
  pathLengthCurve: { strengths: number[]; mean: number[]; low: number[]; high: number[] };
  worstProbes: WorstProbe[];
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
  mig: number | null;
  dci: { disentanglement: number; completeness: number; informativeness: number };
  method: string;
}

export interface AuditReport {
  format: 'plumbline.audit';
  version: 1;
  createdAt: string;
  tool: string;
  generator: { name: string; fingerprint: string };
  settings: AuditSettings;
  probes: { count: number; pinned: number[]; firstSeed: number; psi: number };
  attributes: { name: string; unit: string; source: string; sigma: number }[];
  warnings: string[];
  caution: string;
  directions: DirectionReport[];
  combinations: CombinationReport[];
  /** MIG and DCI of the audited set against the generator's declared factors, when it declares any. */
  groundTruth: GroundTruthMetrics | null;
}

/** One direction's report from its statistics, verdict and rendered worst probes. */
export function directionReport(name: string, stats: DirectionStatistics, judged: { verdict: DirectionVerdict; reason: string }, plan: Pick<AuditPlan, 'distance' | 'epsilon' | 'exponent'>, worstProbes: WorstProbe[]): DirectionReport {
  return {
    name,
    target: stats.target,
    targetChosen: stats.targetChosen,
    verdict: judged.verdict,
    reason: judged.reason,
    targetEffect: stats.targetEffect,
    dependency: stats.dependency,
    leakage: stats.leakage,
    pathLength: { ...stats.pathLength, distance: plan.distance, epsilon: plan.epsilon, exponent: plan.exponent },
    safeRange: stats.safeRange,
    breaksAt: stats.breaksAt,
    curves: stats.curves,
    leakageCurve: stats.leakageCurve,
    pathLengthCurve: stats.pathLengthCurve,
    worstProbes,
  };
}

export function combinationReport(a: string, b: string, stats: CombinationStatistics, verdict: CombinationVerdict): CombinationReport {
  return { a, b, attribute: stats.attribute, attributeInteraction: stats.attributeInteraction, imageInteraction: stats.imageInteraction, verdict };
}

export function assembleReport(x: {
  plan: AuditPlan;
  tool: string;
  generator: { name: string; fingerprint: string };
  attributes: { name: string; unit: string; source: string; sigma: number }[];
  /** Warnings found while sampling (added after the plan's). */
  warnings: string[];
  directions: DirectionReport[];
  combinations: CombinationReport[];
  groundTruth: GroundTruthMetrics | null;
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
    probes: { count: plan.seeds.length, pinned: settings.pinnedSeeds, firstSeed: plan.seeds[settings.pinnedSeeds.length] ?? plan.seeds[0], psi: settings.psi },
    attributes: x.attributes.map((a) => ({ name: a.name, unit: a.unit, source: a.source, sigma: significant(a.sigma, 6) })),
    warnings: [...plan.warnings, ...x.warnings],
    caution: AUDIT_CAUTION,
    directions: x.directions,
    combinations: x.combinations,
    groundTruth: x.groundTruth,
  };
}

/** Whether a probe set this small may pass anything (see MIN_USEFUL_PROBES). */
export const tooFewProbes = (count: number) => count < MIN_USEFUL_PROBES;

/** The report as a JSON file holds it: thumbnails inline as PNG data URIs so the file stands alone. */
export function auditReportFile(report: AuditReport) {
  const dataUri = (png: Uint8Array) => `data:image/png;base64,${Buffer.from(png).toString('base64')}`;
  return { ...report, directions: report.directions.map((d) => ({ ...d, worstProbes: d.worstProbes.map((w) => ({ ...w, before: dataUri(w.before), after: dataUri(w.after) })) })) };
}

/** The report as the protocol carries it: worst probes without images, the images as a separate binary list. */
export function auditReportWire(report: AuditReport) {
  const thumbnails = report.directions.flatMap((d) => d.worstProbes.map((w) => ({ direction: d.name, ...w })));
  const wire = { ...report, directions: report.directions.map((d) => ({ ...d, worstProbes: d.worstProbes.map(({ before: _before, after: _after, ...rest }) => rest) })) };
  return { report: wire, thumbnails };
}
