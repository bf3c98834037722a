// The safe range and break rule, on its own so a pack's claimed range can be recomputed from the
// audit curves it carries. One rule for the audit (statistics.ts) and `verify` (app/engine/pack-ops.ts):
// both call safeRangeFromCurves on the curves exactly as the report states them (six significant
// digits), so anyone holding the report, or a pack's evidence, gets the same range.
//
// The rule (leakage.ts, findBreaks and safeRange): searched on both sides of 0 along the audit's
// strength grid. A side breaks at the first strength where the path length spikes (more than
// `spikeRatio` × its median over |t| ≤ 1), or where a leak sets in (clean start, lower bound at
// or above leakFail, and growing spikeRatio × faster per unit strength than at the first point).
// The safe range is the widest interval around 0 where the UPPER confidence bound of the leak
// stays under leakPass and nothing breaks.
import { findBreaks, safeRange, type BreakPoint, type Interval, type SafeRangeInput } from './leakage.ts';

export interface SafeRangeEvidence {
  /** Audited strengths in σ, including 0. */
  strengths: number[];
  /** Leak (σ) at each strength with its 95% bounds; null where undefined (at 0) or not finite. */
  leakageCurve: (number | null)[];
  leakageLower: (number | null)[];
  leakageUpper: (number | null)[];
  leakPass: number;
  leakFail: number;
  pathLength: { strengths: number[]; mean: number[] };
  spikeRatio: number;
}

/** Names for break causes (the audit has them; a pack's evidence does not need them). */
export interface LeakNames {
  attributes: string[];
  /** Index of the leaked attribute at each strength (null where there is no leak). */
  leakAttribute: (number | null)[];
}

const finite = (v: number | null | undefined): v is number => typeof v === 'number' && Number.isFinite(v);

/** Breaks on each side and the safe range, from the curves as reported. */
export function safeRangeFromCurves(e: SafeRangeEvidence, names?: LeakNames): { safeRange: [number, number]; breaks: { negative: BreakPoint | null; positive: BreakPoint | null } } {
  const pl = e.pathLength;
  const calm = pl.strengths.map((t, i) => (Math.abs(t) <= 1 ? pl.mean[i] : NaN)).filter(Number.isFinite);
  const calmMedian = calm.length ? [...calm].sort((a, b) => a - b)[Math.floor(calm.length / 2)] : NaN;
  const leaks = e.strengths.map((_, i): (Interval & { attribute: number }) | null => {
    const [value, low, high] = [e.leakageCurve[i], e.leakageLower[i], e.leakageUpper[i]];
    if (!finite(value) || !finite(low) || !finite(high)) return null;
    return { value, low, high, attribute: names?.leakAttribute[i] ?? -1 };
  });
  const input: SafeRangeInput = {
    strengths: e.strengths,
    leaks,
    attributeNames: names?.attributes ?? [],
    pathLength: e.strengths.map((s) => (pl.strengths.includes(s) ? pl.mean[pl.strengths.indexOf(s)] : NaN)),
    calmPathLength: calmMedian,
    spikeRatio: e.spikeRatio,
    leakPass: e.leakPass,
    leakFail: e.leakFail,
  };
  const breaks = findBreaks(input);
  return { safeRange: safeRange(input, breaks), breaks };
}
