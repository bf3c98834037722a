// Audit step 3, statistics: from the per-probe measurements of one direction (or one pair of
// directions) to the numbers a report shows — leakage along the grid and at ±reference with BCa
// intervals from the joint probe bootstrap, dependency per attribute, target effect, path length,
// the safe range, where the direction breaks, response curves and the worst probes. Pure: plain
// arrays in, plain numbers out; the engine's measure step (app/engine/audit/measure.ts) fills the
// arrays, and verdict.ts turns these numbers into words.
import { ProbeBootstrap, RunningMoments, percentileRank } from '../stats.ts';
import { exceedance, leakAtReference, leakAtStrength, type BreakPoint, type LeakScreen } from './leakage.ts';
import { filteredMean, percentileFilterBounds } from './path-length.ts';
import type { AuditSettings } from './settings.ts';
import { safeRangeFromCurves } from './safe-range.ts';
import { blindness, type BlindMeasure } from './detection.ts';

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
  /** The attribute of the probe's own leak beyond the instrument; 'none' when nothing moves beyond it. */
  attribute: string;
  /** That leak in σ of the attribute (its change × the share of the attribute's mean change beyond the instrument). */
  leakage: number;
}

export interface DirectionStatistics {
  target: string;
  targetChosen: boolean;
  /** Mean signed change of the target at +reference, in σ of the target. */
  targetEffect: Interval;
  dependency: Record<string, Interval>;
  /**
   * The leak: largest mean |Δa|/σa over non-target attributes at ±reference (attribute
   * dependency, Wu et al. 2021), in σ of that attribute; sign and attribute chosen inside each
   * resample. With a calibrated instrument it is the change beyond the attribute's allowance
   * (what the instrument shows by itself at that size of change; leakScreen), so a measure's own
   * noise and cross-talk are never called a leak. `targetChange` is the target's own mean |Δ|/σ
   * at that sign; `ratio` = leak / target change, a readout the verdict does not use.
   */
  leakage: Interval & { strength: number; attribute: string; unit: 'σ'; targetChange: Interval; ratio: Interval | null };
  /** Probes whose own leak reaches leakPass, with the Clopper–Pearson interval of their share. */
  exceedance: { threshold: number; probes: number; count: number; share: number; low: number; high: number };
  /** Mean path length over |s| ≤ reference within the published 1st/99th-percentile filter. */
  pathLength: Interval & { filtered: number };
  safeRange: [number, number];
  /** The first positive-side break (kept for readers of version-1 reports), and both sides named. */
  breaksAt: number | null;
  breaks: { negative: BreakPoint | null; positive: BreakPoint | null };
  /** Strengths whose mean path length spikes above spikeRatio × the calm median. */
  spikes: number[];
  /** Median of the mean path lengths over |s| ≤ 1 (NaN when none was measured). */
  calmMedian: number;
  /** Mean path length per path-length grid strength (unrounded). */
  pathLengthMeans: number[];
  curves: { strengths: number[]; attributes: Record<string, { mean: number[]; low: number[]; high: number[] }> };
  /** Leak (σ) at each grid strength with its 95% bounds, as reported (null at 0 or where not finite). */
  leakageCurve: (number | null)[];
  leakageLower: (number | null)[];
  leakageUpper: (number | null)[];
  pathLengthCurve: { strengths: number[]; mean: number[]; low: number[]; high: number[] };
  /** The probes that leak most at the worse reference sign, worst first. */
  worstProbes: WorstProbeChoice[];
  /** Per attribute, probes left out at ±reference because the measure was not measurable there (only those with any). */
  notMeasurable: Record<string, number>;
  /** Apparent leaks no larger than the instrument shows by itself, largest first: not counted. */
  withinInstrument: WithinInstrument[];
  /**
   * Judged non-target measures this audit of the direction cannot see a leak into at a verdict
   * threshold (detection.ts): their allowance at ±reference — the smallest leak that registers at
   * either sign — is at or above leakPass or leakFail. Largest limit first.
   */
  blind: BlindMeasure[];
}

/**
 * What the instrument shows by itself, per attribute (issue 9 part 3, app/core/audit/calibration.ts):
 * its noise floor in σ, and the cross-talk of the exact operation that owns a target (per attribute,
 * a ratio to the target's own change; 0 when no operation owns it). A change within
 * floorMultiple × floor, or within crossTalkMultiple × cross-talk × the target's change, is not
 * called a leak; nor is a change explained, through cross-talk, by a real leak into another
 * attribute (a background-lightness leak re-quantises the background's chroma).
 */
export interface InstrumentAllowance {
  floor: number[];
  crossTalk: (target: string) => number[];
  floorMultiple: number;
  crossTalkMultiple: number;
}

export interface WithinInstrument {
  attribute: string;
  /** mean |Δ|/σ of this attribute at the worse reference sign */
  change: number;
  /** that change over the target's own mean |Δ|/σ */
  ratio: number;
  noiseFloor: number;
  crossTalk: number;
  /** set when the change is explained through cross-talk by a real leak into this attribute */
  via?: string;
}

/** Target changes below this (in σ of the target) count as not moving it (a ratio to it is unbounded). */
const NO_EFFECT = 1e-9;

/**
 * The leak screen of a direction (leakage.ts LeakScreen): `candidate[j] === false` marks an
 * attribute reported but never the leak; with a calibrated instrument, each attribute's allowance
 * is the most the instrument shows by itself at this size of change — floorMultiple × its noise
 * floor, crossTalkMultiple × the cross-talk of the exact operation owning the target × the
 * target's change, or crossTalkMultiple × the cross-talk of an operation owning another attribute
 * × that attribute's change (a background-lightness leak re-quantises the background's chroma).
 * `explain` says, for the report, which attributes the allowance covers entirely and why.
 */
export function leakScreen(attributes: string[], candidate: boolean[] | undefined, instrument: InstrumentAllowance | undefined) {
  const K = attributes.length;
  const crossTalk = instrument ? attributes.map((a) => instrument.crossTalk(a)) : [];
  /** Allowance of every attribute, and which term set it (-1 floor, else the attribute whose operation's cross-talk). */
  const terms = (means: ArrayLike<number>, t: number) => {
    const allowance = new Float64Array(K);
    const source = new Int32Array(K).fill(-1);
    for (let j = 0; j < K; j++) {
      if (candidate?.[j] === false) {
        allowance[j] = NaN;
        continue;
      }
      if (!instrument) continue;
      allowance[j] = instrument.floorMultiple * instrument.floor[j];
      for (let i = 0; i < K; i++) {
        // The target's own operation, or another attribute's operation moving j through cross-talk.
        if (i === j || !(crossTalk[i][j] > 0) || Number.isNaN(means[i])) continue;
        const v = instrument.crossTalkMultiple * crossTalk[i][j] * means[i];
        if (v > allowance[j] || (i === t && v === allowance[j] && source[j] !== t)) {
          allowance[j] = v;
          source[j] = i;
        }
      }
    }
    return { allowance, source };
  };
  const screen: LeakScreen = { allowance: (means, t) => terms(means, t).allowance, calibrated: !!instrument };
  const explain = (means: ArrayLike<number>, t: number): WithinInstrument[] => {
    if (!instrument) return [];
    const { allowance, source } = terms(means, t);
    const out: WithinInstrument[] = [];
    const tChange = means[t];
    for (let j = 0; j < K; j++) {
      if (j === t || Number.isNaN(allowance[j]) || !(means[j] > 0) || means[j] > allowance[j]) continue;
      const ratio = tChange > NO_EFFECT ? means[j] / tChange : Infinity;
      const via = source[j] >= 0 && source[j] !== t ? attributes[source[j]] : undefined;
      out.push({ attribute: attributes[j], change: significant(means[j]), ratio: significant(ratio), noiseFloor: significant(instrument.floor[j]), crossTalk: significant(crossTalk[t]?.[j] ?? 0), ...(via ? { via } : {}) });
    }
    return out.sort((a, b) => b.change - a.change);
  };
  return { screen, allowance: (means: ArrayLike<number>, t: number) => terms(means, t).allowance, terms, explain };
}

/** What a random direction is compared on: see nullSummary. */
export interface NullSummary {
  /** mean |Δ| / σ of every attribute at +reference and at −reference. */
  plus: number[];
  minus: number[];
  /** End-point path length: the filtered mean at strength 0 (each probe itself), as the published 'end' variant. */
  pathLength: number;
}

/**
 * A direction's numbers for the null comparison — a random direction's, or an audited one's read
 * the same way: mean |Δ|/σ of every attribute at ±reference and the end-point path length.
 */
export function nullSummary(m: DirectionMeasurements, plan: Pick<StatisticsGrid, 'grid' | 'pathLengthGrid' | 'reference'>): NullSummary {
  const at = (s: number) => m.change[plan.grid.indexOf(s)]!.map(meanAbs);
  const zero = plan.pathLengthGrid.indexOf(0);
  return { plus: at(plan.reference), minus: at(-plan.reference), pathLength: zero >= 0 ? filteredMean(m.pathLength[zero]).mean : NaN };
}

/**
 * Percentiles (mid-rank, in %) of a direction's target effect, leak and path length among the
 * null directions, the direction and every null read the same way (both summarised by
 * nullSummary) for this direction's target: mean |Δ target| at +reference, the largest mean |Δ|
 * over the other attributes at ±reference, and the end-point path length (at strength 0).
 */
export function nullPercentiles(direction: NullSummary, target: number, nulls: NullSummary[], candidate?: boolean[]): { count: number; targetEffect: number; leakage: number; pathLength: number } {
  // Composites the user did not pick are never the leak, for the nulls as for the direction; an
  // attribute not measurable anywhere (NaN) is left out.
  const leakOf = (x: NullSummary) => Math.max(0, ...[x.plus, x.minus].flatMap((side) => side.filter((v, j) => j !== target && candidate?.[j] !== false && !Number.isNaN(v))));
  return {
    count: nulls.length,
    targetEffect: significant(percentileRank(nulls.map((x) => x.plus[target]), direction.plus[target]), 4),
    leakage: significant(percentileRank(nulls.map(leakOf), leakOf(direction)), 4),
    pathLength: significant(percentileRank(nulls.map((x) => x.pathLength), direction.pathLength), 4),
  };
}

/** Mean |v| over the measurable probes (NaN = not measurable there); NaN when none is. */
function meanAbs(c: Float64Array): number {
  let sum = 0;
  let n = 0;
  for (const v of c) if (!Number.isNaN(v)) (sum += Math.abs(v)), n++;
  return n ? sum / n : NaN;
}

/**
 * Each probe's path-length samples over |s| ≤ reference, with the published 1st/99th-percentile
 * filter applied over all samples: per-probe sums and counts of the kept ones (the bootstrap
 * statistic is Σ sums / Σ counts, the mean of kept samples), and that mean.
 */
function pathLengthColumns(m: DirectionMeasurements, plan: Pick<StatisticsGrid, 'pathLengthGrid' | 'reference'>): { sums: Float64Array; counts: Float64Array; mean: number; dropped: number } {
  const inner = plan.pathLengthGrid.map((s, i) => [s, i] as const).filter(([s]) => Math.abs(s) <= plan.reference).map(([, i]) => i);
  const n = m.pathLength[0]?.length ?? 0;
  const all: number[] = [];
  for (const i of inner) for (let p = 0; p < n; p++) all.push(m.pathLength[i][p]);
  const [lo, hi] = percentileFilterBounds(all);
  const sums = new Float64Array(n);
  const counts = new Float64Array(n);
  for (const i of inner)
    for (let p = 0; p < n; p++) {
      const v = m.pathLength[i][p];
      if (v >= lo && v <= hi) {
        sums[p] += v;
        counts[p]++;
      }
    }
  const total = counts.reduce((a, b) => a + b, 0);
  return { sums, counts, mean: total ? sums.reduce((a, b) => a + b, 0) / total : NaN, dropped: all.length - total };
}

/**
 * `leak[j] === false` marks an attribute reported but never taken as the leak (a composite or
 * descriptor the user did not pick); `instrument` sets aside changes within what the instrument
 * shows by itself. NaN changes are "not measurable on that probe" and are left out of every mean.
 */
export function directionStatistics(m: DirectionMeasurements, plan: StatisticsGrid, attributes: string[], seeds: number[], declaredTarget: string | null, bootstrap: ProbeBootstrap, leak?: boolean[], instrument?: InstrumentAllowance): DirectionStatistics {
  const { grid, pathLengthGrid: pplGrid, reference: ref, settings } = plan;
  const n = seeds.length;
  const K = attributes.length;
  const signed = grid.map(() => attributes.map(() => new RunningMoments()));
  grid.forEach((_, gi) => {
    const rows = m.change[gi];
    if (!rows) return;
    for (let j = 0; j < K; j++) for (let p = 0; p < n; p++) signed[gi][j].push(rows[j][p]);
  });
  const plusRows = m.change[grid.indexOf(ref)]!;
  const minusRows = m.change[grid.indexOf(-ref)]!;
  const ppl = pplGrid.map((_, pi) => {
    const moments = new RunningMoments();
    for (let p = 0; p < n; p++) moments.push(m.pathLength[pi][p]);
    return moments;
  });

  // The leak at ±reference, with sign, worst attribute and (when none is declared) the target
  // chosen inside every resample.
  const declared = declaredTarget ? attributes.indexOf(declaredTarget) : -1;
  const { screen, allowance, terms, explain } = leakScreen(attributes, leak, instrument);
  const atRef = leakAtReference(bootstrap, plusRows, minusRows, declared >= 0 ? declared : null, ref, screen, attributes.map((_, j) => leak?.[j] !== false));
  const target = atRef.targetIndex;
  const targetChosen = declared < 0;
  const worseSign = atRef.strength > 0 ? 0 : 1;
  const worseRows = worseSign === 0 ? plusRows : minusRows;

  // Leak along the grid, each with its interval; the safe range reads the upper bounds.
  const curveLeaks = grid.map((s, gi) => (s === 0 ? null : leakAtStrength(bootstrap, m.change[gi]!, target, screen)));
  const pplMeans = ppl.map((mm) => mm.mean);
  const calm = pplGrid.map((t, i) => (Math.abs(t) <= 1 ? pplMeans[i] : NaN)).filter(Number.isFinite);
  const calmMedian = calm.length ? [...calm].sort((a, b) => a - b)[Math.floor(calm.length / 2)] : NaN;
  const spikeRatio = settings.pathLength.spikeRatio;
  // Breaks and safe range: one rule (safe-range.ts, both sides), applied to the curves exactly as
  // the report states them, so anyone holding the report (or a pack's evidence) recomputes them.
  const reported = (v: number) => (Number.isFinite(v) ? significant(v) : null);
  const leakageCurve = curveLeaks.map((l) => (l === null ? null : reported(l.value)));
  const leakageLower = curveLeaks.map((l) => (l === null ? null : reported(l.low)));
  const leakageUpper = curveLeaks.map((l) => (l === null ? null : reported(l.high)));
  const pathLengthCurveMean = pplMeans.map((v) => significant(v));
  const { safeRange: safe, breaks } = safeRangeFromCurves(
    { strengths: grid, leakageCurve, leakageLower, leakageUpper, leakPass: settings.leakPass, leakFail: settings.leakFail, pathLength: { strengths: pplGrid, mean: pathLengthCurveMean }, spikeRatio },
    { attributes, leakAttribute: curveLeaks.map((l) => l?.attribute ?? null) },
  );

  const dependency: Record<string, Interval> = {};
  for (let j = 0; j < K; j++) dependency[attributes[j]] = roundInterval(bootstrap.interval([worseRows[j].map(Math.abs)], (mns) => mns[0]));
  const targetEffect = roundInterval(bootstrap.interval([plusRows[target]], (mns) => mns[0]));
  const paths = pathLengthColumns(m, plan);
  const pathLength = roundInterval(bootstrap.interval([paths.sums, paths.counts], (mns) => (mns[1] > 0 ? mns[0] / mns[1] : NaN)));
  const ratioFinite = [atRef.ratio.value, atRef.ratio.low, atRef.ratio.high].every(Number.isFinite);

  // Allowances at each reference sign on the full sample (the exceedance and the worst probes
  // read these; the leak's interval recomputes them inside every resample).
  const sideMeans = (rows: Float64Array[]) => rows.map(meanAbs);
  const plusMeans = sideMeans(plusRows);
  const minusMeans = sideMeans(minusRows);
  const plusAllowance = allowance(plusMeans, target);
  const minusAllowance = allowance(minusMeans, target);
  const worseAllowance = worseSign === 0 ? plusAllowance : minusAllowance;
  /** Share of each attribute's mean change beyond its allowance (1 with none; NaN: never a leak). */
  const beyondShare = (means: number[], allowance: Float64Array) => means.map((m, j) => (Number.isNaN(allowance[j]) ? NaN : allowance[j] === 0 ? 1 : m > 0 ? Math.max(0, m - allowance[j]) / m : 0));

  // Worst probes at the worse reference sign: each probe's own leak as the exceedance counts it —
  // its change in each attribute that can leak, discounted by the share of that attribute's mean
  // change beyond the instrument (beyondShare), in σ of the leaked attribute. An attribute the
  // instrument explains on average (set aside) never names a probe's leak: one probe's scatter of
  // a noisy measure is not a leak. When nothing counts on a probe its attribute is 'none' (the
  // caption then says nothing moved beyond the instrument). A probe where none is measurable is left out.
  const worseShare = beyondShare(worseSign === 0 ? plusMeans : minusMeans, worseAllowance);
  const others = attributes.map((_, j) => j).filter((j) => j !== target && !Number.isNaN(worseAllowance[j]));
  const worst: WorstProbeChoice[] = [];
  for (let p = 0; p < n && others.length; p++) {
    let bj = -1;
    let bv = -Infinity;
    let measurable = false;
    for (const j of others) {
      const v = Math.abs(worseRows[j][p]) * worseShare[j];
      if (Number.isNaN(v)) continue;
      measurable = true;
      if (v > bv) (bj = j), (bv = v);
    }
    if (!measurable) continue;
    worst.push({ seed: seeds[p], strength: atRef.strength, attribute: bv > 0 ? attributes[bj] : 'none', leakage: Math.max(0, bv), index: p });
  }
  worst.sort((a, b) => b.leakage - a.leakage);

  // What this audit of the direction cannot see: per judged non-target attribute, the smallest leak
  // that registers at either reference sign (its allowance there, and what set it), when that
  // reaches a verdict threshold.
  const sides = [terms(plusMeans, target), terms(minusMeans, target)];
  const blind: BlindMeasure[] = [];
  for (let j = 0; j < K; j++) {
    if (j === target || Number.isNaN(sides[0].allowance[j])) continue;
    const side = sides[1].allowance[j] < sides[0].allowance[j] ? sides[1] : sides[0];
    const limit = side.allowance[j];
    const blindTo = blindness(limit, settings);
    if (blindTo) blind.push({ attribute: attributes[j], limit: significant(limit), blindTo, ...(side.source[j] >= 0 ? { via: attributes[side.source[j]] } : {}) });
  }
  blind.sort((a, b) => b.limit - a.limit);

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
    leakage: { ...roundInterval(atRef.leak), strength: atRef.strength, attribute: atRef.attribute >= 0 ? attributes[atRef.attribute] : 'none', unit: 'σ', targetChange: roundInterval(atRef.target), ratio: ratioFinite ? roundInterval(atRef.ratio) : null },
    exceedance: roundExceedance(exceedance(plusRows, minusRows, target, settings.leakPass, 0.95, [beyondShare(plusMeans, plusAllowance), beyondShare(minusMeans, minusAllowance)])),
    pathLength: { ...pathLength, filtered: paths.dropped },
    safeRange: safe,
    breaksAt: breaks.positive?.strength ?? null,
    breaks,
    spikes: pplGrid.filter((s, i) => calmMedian > 0 && pplMeans[i] > spikeRatio * calmMedian),
    calmMedian,
    pathLengthMeans: pplMeans,
    curves,
    leakageCurve,
    leakageLower,
    leakageUpper,
    pathLengthCurve: { strengths: pplGrid, mean: pathLengthCurveMean, low: ppl.map((mm) => significant(mm.interval()[0])), high: ppl.map((mm) => significant(mm.interval()[1])) },
    worstProbes: worst.slice(0, settings.worstProbes),
    notMeasurable: Object.fromEntries(
      attributes
        .map((a, j) => [a, Math.max(...[plusRows, minusRows].map((rows) => rows[j].reduce((c, v) => c + (Number.isNaN(v) ? 1 : 0), 0)))] as const)
        .filter(([, c]) => c > 0),
    ),
    withinInstrument: explain(worseSign === 0 ? plusMeans : minusMeans, target),
    blind,
  };
}

function roundExceedance<T extends { share: number; low: number; high: number }>(e: T): T {
  return { ...e, share: significant(e.share, 4), low: significant(e.low, 4), high: significant(e.high, 4) };
}

export interface CombinationStatistics {
  /** The attribute whose changes add up worst. */
  attribute: string;
  /** Mean non-additivity of that attribute, in σ, with its interval. */
  attributeInteraction: Interval;
  imageInteraction: Interval;
}

/**
 * `seed` is the audit seed; pairs resample with seed + 1 so they do not reuse the directions'
 * resamples. The worst attribute is chosen inside each resample (the interval is that of the max).
 * `allowance[j]` (NaN: never counted, e.g. a composite the user did not pick; absent: 0 for all)
 * is the non-additivity the instrument shows by itself in attribute j; only what lies beyond it
 * counts, max(0, mean − allowance), as for a direction's leak (leakScreen). When nothing moves
 * beyond it, the worst attribute is 'none'.
 */
export function combinationStatistics(m: PairMeasurements, attributes: string[], resamples: number, seed: number, allowance?: ArrayLike<number>): CombinationStatistics {
  const probes = m.imageInteraction.length;
  const bootstrap = new ProbeBootstrap(probes, resamples, seed + 1);
  const beyond = (mns: ArrayLike<number>) => {
    let best = -1;
    let value = 0;
    for (let j = 0; j < mns.length; j++) {
      const a = allowance ? allowance[j] : 0;
      if (Number.isNaN(a) || Number.isNaN(mns[j])) continue;
      const v = Math.max(0, mns[j] - a);
      if (best < 0 || v > value) (best = j), (value = v);
    }
    return { best, value };
  };
  // Probes where an attribute is not measurable (NaN) are left out of its mean.
  const full = beyond(m.attributeChange.map(meanAbs));
  const named = full.best >= 0 && !(allowance && full.value === 0);
  return {
    attribute: named ? attributes[full.best] : 'none',
    attributeInteraction: roundInterval(bootstrap.interval(m.attributeChange, (mns) => beyond(mns).value)),
    imageInteraction: roundInterval(bootstrap.interval([m.imageInteraction], (mns) => mns[0])),
  };
}

/**
 * The non-additivity the instrument shows by itself in each attribute, for a pair whose members
 * change the attributes by `changeA` and `changeB` (mean |Δ|/σ at +reference): the noise of three
 * measured changes (Δ(a+b), Δa, Δb; √3 × the noise floor, times floorMultiple), plus the cross-talk
 * the exact operations show into it for what the pair moves (crossTalkMultiple × the largest
 * cross-talk × change over the attributes the operations own). NaN where `candidate` is false.
 */
export function combinationAllowance(attributes: string[], instrument: InstrumentAllowance | undefined, changeA: ArrayLike<number>, changeB: ArrayLike<number>, candidate?: boolean[]): Float64Array {
  return Float64Array.from(attributes, (_, j) => {
    if (candidate?.[j] === false) return NaN;
    if (!instrument) return 0;
    let allowance = instrument.floorMultiple * Math.sqrt(3) * instrument.floor[j];
    for (let i = 0; i < attributes.length; i++) {
      if (i === j) continue;
      const x = instrument.crossTalk(attributes[i])[j];
      const moved = (Number.isNaN(changeA[i]) ? 0 : changeA[i]) + (Number.isNaN(changeB[i]) ? 0 : changeB[i]);
      if (x > 0) allowance = Math.max(allowance, instrument.crossTalkMultiple * x * moved);
    }
    return allowance;
  });
}

/** Six significant digits: enough for any reading, small values keep their precision. */
export const significant = (v: number, digits = 6) => (Number.isFinite(v) ? Number(v.toPrecision(digits)) : v);
export const roundInterval = (i: Interval): Interval => ({ value: significant(i.value), low: significant(i.low), high: significant(i.high) });
