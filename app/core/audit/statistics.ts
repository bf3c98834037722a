// Audit step 3, statistics: from the per-probe measurements of one direction (or one pair of
// directions) to the numbers a report shows — leakage along the grid and at ±reference with BCa
// intervals from the joint probe bootstrap, dependency per attribute, target effect, path length,
// the safe range, where the direction breaks, response curves and the worst probes. Pure: plain
// arrays in, plain numbers out; the engine's measure step (app/engine/audit/measure.ts) fills the
// arrays, and verdict.ts turns these numbers into words.
import { ProbeBootstrap, RunningMoments } from '../stats.ts';
import type { AuditSettings } from './settings.ts';

export interface Interval {
  value: number;
  low: number;
  high: number;
}

/** One direction's raw measurements over the probe set (every array has one value per probe). */
export interface DirectionMeasurements {
  /** [grid index][attribute]: signed attribute change Δ/σ at that strength; null at strength 0 (nothing to compare). */
  change: (Float64Array[] | null)[];
  /** [path-length grid index]: path length d(G(z + sσu), G(z + (s+ε)σu)) / ε^exponent. */
  pathLength: Float64Array[];
}

/** One pair's raw measurements over the combination probes. */
export interface PairMeasurements {
  /** [attribute]: non-additivity |Δ(a+b) − Δa − Δb| / σ at +reference strength. */
  attributeChange: Float64Array[];
  /** RMS of the images' mixed finite difference at ε = 1 σ (METHODS §2.4), in image range units. */
  imageInteraction: Float64Array;
}

/** The grid and thresholds the statistics need (a subset of the audit plan). */
export interface StatisticsGrid {
  grid: number[];
  pathLengthGrid: number[];
  reference: number;
  settings: Pick<AuditSettings, 'leakPass' | 'leakFail' | 'worstProbes'> & { pathLength: Pick<AuditSettings['pathLength'], 'spikeRatio'> };
}

export interface WorstProbeChoice {
  /** Index into the probe set. */
  index: number;
  seed: number;
  strength: number;
  attribute: string;
  leakage: number;
}

export interface DirectionStatistics {
  target: string;
  targetChosen: boolean;
  targetEffect: Interval;
  dependency: Record<string, Interval>;
  leakage: Interval & { strength: number; attribute: string };
  pathLength: Interval;
  safeRange: [number, number];
  breaksAt: number | null;
  /** Strengths whose mean path length spikes above spikeRatio × the calm median. */
  spikes: number[];
  /** Median of the mean path lengths over |s| ≤ 1 (NaN when none was measured). */
  calmMedian: number;
  /** Mean path length per path-length grid strength (unrounded). */
  pathLengthMeans: number[];
  curves: { strengths: number[]; attributes: Record<string, { mean: number[]; low: number[]; high: number[] }> };
  /** Leakage at each grid strength (null at 0 and where the target does not move). */
  leakageCurve: (number | null)[];
  pathLengthCurve: { strengths: number[]; mean: number[]; low: number[]; high: number[] };
  /** The probes that leak most at the worse reference sign, worst first. */
  worstProbes: WorstProbeChoice[];
}

/** Target effects below this (in σ of the target) count as not moving it. */
const NO_EFFECT = 1e-9;

export function directionStatistics(m: DirectionMeasurements, plan: StatisticsGrid, attributes: string[], seeds: number[], declaredTarget: string | null, bootstrap: ProbeBootstrap): DirectionStatistics {
  const { grid, pathLengthGrid: pplGrid, reference: ref, settings } = plan;
  const n = seeds.length;
  const K = attributes.length;
  // Streaming moments per strength and attribute, of the signed and absolute change, in probe order.
  const signed = grid.map(() => attributes.map(() => new RunningMoments()));
  const absolute = grid.map(() => attributes.map(() => new RunningMoments()));
  grid.forEach((_, gi) => {
    const rows = m.change[gi];
    if (!rows) return;
    for (let j = 0; j < K; j++)
      for (let p = 0; p < n; p++) {
        signed[gi][j].push(rows[j][p]);
        absolute[gi][j].push(Math.abs(rows[j][p]));
      }
  });
  const refRows = m.change[grid.indexOf(ref)]!;
  const minusRows = m.change[grid.indexOf(-ref)]!;
  // Per-probe |Δ|/σ at ±ref for the bootstrap: [sign][attribute]; signed Δ/σ at +ref.
  const refAbs = [refRows, minusRows].map((rows) => rows.map((col) => col.map(Math.abs)));
  const refSigned = refRows;
  const ppl = pplGrid.map((_, pi) => {
    const moments = new RunningMoments();
    for (let p = 0; p < n; p++) moments.push(m.pathLength[pi][p]);
    return moments;
  });
  // Each probe's mean path length over |s| ≤ ref, summed in grid order.
  const pplPerProbe = new Float64Array(n);
  const pplCountPerProbe = new Uint16Array(n);
  pplGrid.forEach((s, pi) => {
    if (Math.abs(s) > ref) return;
    for (let p = 0; p < n; p++) {
      pplPerProbe[p] += m.pathLength[pi][p];
      pplCountPerProbe[p]++;
    }
  });
  for (let p = 0; p < n; p++) pplPerProbe[p] /= Math.max(1, pplCountPerProbe[p]);

  // Target: declared, or the attribute this direction moves most at +ref.
  const refIndex = grid.indexOf(ref);
  let target = declaredTarget ? attributes.indexOf(declaredTarget) : -1;
  const targetChosen = target < 0;
  if (targetChosen) target = absolute[refIndex].reduce((best, mm, j) => (mm.mean > absolute[refIndex][best].mean ? j : best), 0);
  const others = attributes.map((_, j) => j).filter((j) => j !== target);

  // Leakage along the grid (point estimates from the streaming means).
  const leakageCurve = grid.map((s, gi) => {
    if (s === 0) return null;
    const t = absolute[gi][target].mean;
    if (!(t > NO_EFFECT)) return Infinity;
    return Math.max(0, ...others.map((j) => absolute[gi][j].mean)) / t;
  });
  const pplMeans = ppl.map((mm) => mm.mean);
  const calm = pplGrid.map((t, i) => (Math.abs(t) <= 1 ? pplMeans[i] : NaN)).filter(Number.isFinite);
  const calmMedian = calm.length ? [...calm].sort((a, b) => a - b)[Math.floor(calm.length / 2)] : NaN;
  const spikeAt = (s: number) => {
    const i = pplGrid.indexOf(s);
    return i >= 0 && calmMedian > 0 && pplMeans[i] > settings.pathLength.spikeRatio * calmMedian;
  };
  // Safe range: widest interval around 0 where leakage stays under the pass threshold and path length does not spike.
  const safeSide = (sign: 1 | -1) => {
    let edge = 0;
    for (const s of grid.filter((x) => x * sign > 0).sort((a, b) => Math.abs(a) - Math.abs(b))) {
      const l = leakageCurve[grid.indexOf(s)]!;
      if (!(l < settings.leakPass) || spikeAt(s)) break;
      edge = s;
    }
    return edge;
  };
  const safeRange: [number, number] = [safeSide(-1), safeSide(1)];
  // Breaking: behaviour that changes along the slider — a path-length spike, or leakage that
  // starts clean and crosses the fail threshold further out (a direction leaky from the start
  // is leaky, not broken).
  const breaksAt = (() => {
    const positive = grid.filter((x) => x > 0);
    const cleanStart = leakageCurve[grid.indexOf(positive[0])]! < settings.leakPass;
    for (const s of positive) if (spikeAt(s) || (cleanStart && !(leakageCurve[grid.indexOf(s)]! < settings.leakFail))) return s;
    return null;
  })();

  // Intervals (joint bootstrap over probes).
  const leakStat = (sign: 0 | 1) => {
    const cols = [refAbs[sign][target], ...others.map((j) => refAbs[sign][j])];
    return bootstrap.interval(cols, (mns) => {
      const t = mns[0];
      let worstDep = 0;
      for (let k = 1; k < mns.length; k++) worstDep = Math.max(worstDep, mns[k]);
      return t > 1e-12 ? worstDep / t : Infinity;
    });
  };
  const plus = leakStat(0);
  const minus = leakStat(1);
  const worseSign = plus.value >= minus.value ? 0 : 1;
  const leakInterval = worseSign === 0 ? plus : minus;
  const sum = (col: Float64Array) => col.reduce((x, y) => x + y, 0);
  const leakAttr = others.reduce((b, j) => (sum(refAbs[worseSign][j]) > sum(refAbs[worseSign][b]) ? j : b), others[0] ?? target);
  const dependency: Record<string, Interval> = {};
  for (let j = 0; j < K; j++) dependency[attributes[j]] = roundInterval(bootstrap.interval([refAbs[worseSign][j]], (mns) => mns[0]));
  const targetEffect = roundInterval(bootstrap.interval([refSigned[target]], (mns) => mns[0]));
  const pathLength = roundInterval(bootstrap.interval([pplPerProbe], (mns) => mns[0]));

  // Worst probes at the worse reference sign: largest leak relative to the target change.
  const worst: WorstProbeChoice[] = [];
  for (let p = 0; p < n; p++) {
    const t = Math.max(refAbs[worseSign][target][p], 1e-9);
    let bj = others[0] ?? target;
    for (const j of others) if (refAbs[worseSign][j][p] > refAbs[worseSign][bj][p]) bj = j;
    worst.push({ seed: seeds[p], strength: worseSign === 0 ? ref : -ref, attribute: attributes[bj], leakage: refAbs[worseSign][bj][p] / t, index: p });
  }
  worst.sort((a, b) => b.leakage - a.leakage);

  const curves: DirectionStatistics['curves'] = { strengths: grid, attributes: {} };
  attributes.forEach((name, j) => {
    const mean: number[] = [];
    const low: number[] = [];
    const high: number[] = [];
    grid.forEach((s, gi) => {
      if (s === 0) return void (mean.push(0), low.push(0), high.push(0));
      const [lo, hi] = signed[gi][j].interval();
      mean.push(significant(signed[gi][j].mean));
      low.push(significant(lo));
      high.push(significant(hi));
    });
    curves.attributes[name] = { mean, low, high };
  });

  return {
    target: attributes[target],
    targetChosen,
    targetEffect,
    dependency,
    leakage: { ...roundInterval(leakInterval), strength: worseSign === 0 ? ref : -ref, attribute: attributes[leakAttr] },
    pathLength,
    safeRange,
    breaksAt,
    spikes: pplGrid.filter((s) => spikeAt(s)),
    calmMedian,
    pathLengthMeans: pplMeans,
    curves,
    leakageCurve: leakageCurve.map((l) => (l === null ? null : Number.isFinite(l) ? significant(l) : null)),
    pathLengthCurve: { strengths: pplGrid, mean: ppl.map((mm) => significant(mm.mean)), low: ppl.map((mm) => significant(mm.interval()[0])), high: ppl.map((mm) => significant(mm.interval()[1])) },
    worstProbes: worst.slice(0, settings.worstProbes),
  };
}

export interface CombinationStatistics {
  /** The attribute whose changes add up worst. */
  attribute: string;
  /** Mean non-additivity of that attribute, in σ, with its interval. */
  attributeInteraction: Interval;
  imageInteraction: Interval;
}

/** `seed` is the audit seed; pairs resample with seed + 1 so they do not reuse the directions' resamples. */
export function combinationStatistics(m: PairMeasurements, attributes: string[], resamples: number, seed: number): CombinationStatistics {
  const probes = m.imageInteraction.length;
  const bootstrap = new ProbeBootstrap(probes, resamples, seed + 1);
  let worstJ = 0;
  const means = m.attributeChange.map((c) => c.reduce((x, y) => x + y, 0) / probes);
  means.forEach((v, j) => v > means[worstJ] && (worstJ = j));
  return {
    attribute: attributes[worstJ],
    attributeInteraction: roundInterval(bootstrap.interval([m.attributeChange[worstJ]], (mns) => mns[0])),
    imageInteraction: roundInterval(bootstrap.interval([m.imageInteraction], (mns) => mns[0])),
  };
}

/** Six significant digits: enough for any reading, small values keep their precision. */
export const significant = (v: number, digits = 6) => (Number.isFinite(v) ? Number(v.toPrecision(digits)) : v);
export const roundInterval = (i: Interval): Interval => ({ value: significant(i.value), low: significant(i.low), high: significant(i.high) });
