// Leakage statistics and the verdict rule of an audit, as pure functions over per-probe
// attribute changes (the engine renders and scores; everything that decides is here).
//
// Leakage is measured the published way: the attribute dependency of Wu, Lischinski & Shechtman
// 2021 (StyleSpace), each attribute's per-probe change in σ of that attribute, |Δa_i|/σ_i, averaged
// over probes; the direction's leak is the largest over the attributes other than its target
// (max-AD), shown beside the target's own change |Δa_t|/σ_t. The ratio leak / target is kept as a
// readout only. Whatever the summary picks — the worse reference sign, the worst attribute, an
// unnamed target — is picked again inside every bootstrap resample, so the interval accounts for
// the selection (METHODS §10). Every verdict also carries the probe-level exceedance: the share
// of probes whose own leak reaches the pass threshold, with a Clopper–Pearson interval, so it
// says what the probe count can and cannot rule out.
import { ProbeBootstrap, clopperPearson } from '../stats.ts';

export interface Interval {
  value: number;
  low: number;
  high: number;
}

/** Per-probe signed changes Δa_j/σ_j at one strength: one column (length = probes) per attribute. */
export type ChangeColumns = Float64Array[];

export interface LeakSummary {
  /** max over reference signs and non-target attributes of mean |Δa_j|/σ_j, with its BCa interval. */
  leak: Interval;
  /** The sign and attribute the full-sample estimate picks (resamples pick their own). */
  strength: number;
  attribute: number;
  /** mean |Δa_t|/σ_t at that sign, with its interval. */
  target: Interval;
  /** leak / target, chosen inside each resample like the leak (a readout; verdicts do not use it). */
  ratio: Interval;
  /** Target index used (declared, or the attribute moved most — chosen inside each resample too). */
  targetIndex: number;
}

/** Mean over the measurable probes (NaN = "not measurable here", left out); NaN when none is. */
const mean = (c: Float64Array) => {
  let s = 0;
  let n = 0;
  for (const v of c) if (!Number.isNaN(v)) (s += v), n++;
  return n ? s / n : NaN;
};
const absColumns = (cols: ChangeColumns) => cols.map((c) => c.map(Math.abs));

/**
 * How much of each attribute's change may be called a leak (issue 9): given the mean |Δ|/σ of every
 * attribute at one strength and the target's index, the allowance per attribute — what the
 * instrument shows by itself at that size of change (its noise floor, its cross-talk under exact
 * transforms) — or NaN for an attribute that is never a leak candidate (a composite the user did
 * not pick). The leak of an attribute is its change beyond its allowance, max(0, mean − allowance):
 * continuous in the means, so it bootstraps like the mean itself, and evaluated inside every
 * resample like the choice of sign and attribute. Without a screen every non-target attribute
 * counts in full (allowance 0), which is attribute dependency as published.
 */
export interface LeakScreen {
  allowance: (means: ArrayLike<number>, target: number) => Float64Array;
  /** true when allowances come from a calibrated instrument (a leak of 0 then names no attribute) */
  calibrated: boolean;
}
export const noScreen = (candidates?: boolean[]): LeakScreen => ({
  allowance: (means) => Float64Array.from({ length: means.length }, (_, j) => (candidates?.[j] === false ? NaN : 0)),
  calibrated: false,
});

/** The leak reading of every attribute at one sign: change beyond allowance (≥ 0), −∞ where it cannot be the leak. */
function leakReadings(means: ArrayLike<number>, target: number, screen: LeakScreen): Float64Array {
  const allowance = screen.allowance(means, target);
  return Float64Array.from({ length: means.length }, (_, j) => {
    if (j === target || Number.isNaN(allowance[j]) || Number.isNaN(means[j])) return -Infinity;
    return Math.max(0, means[j] - allowance[j]);
  });
}

/**
 * The leak at ±reference: columns[0] are the changes at +reference, columns[1] at −reference.
 * target = null picks, inside each resample, the attribute with the largest mean |Δ| at +reference
 * among the candidates.
 */
export function leakAtReference(bootstrap: ProbeBootstrap, plus: ChangeColumns, minus: ChangeColumns, target: number | null, reference: number, screen: LeakScreen = noScreen(), candidates: boolean[] = plus.map(() => true)): LeakSummary {
  const K = plus.length;
  const cols = [...absColumns(plus), ...absColumns(minus)];
  const pickTarget = (m: Float64Array) => {
    if (target !== null) return target;
    // The attribute moved most at +reference among those that may be a target (NaN never wins).
    let best = candidates.indexOf(true);
    if (best < 0) best = 0;
    for (let j = 0; j < K; j++) if (candidates[j] && m[j] > m[best]) best = j;
    return best;
  };
  /** [leak, sign (0 = +, 1 = −), attribute, target, ratio] of a vector of column means. */
  const pick = (m: Float64Array) => {
    const t = pickTarget(m);
    let leak = -Infinity;
    let sign = 0;
    let attribute = -1;
    for (let s = 0; s < 2; s++) {
      const reading = leakReadings(m.subarray(s * K, s * K + K), t, screen);
      for (let j = 0; j < K; j++)
        if (reading[j] > leak) {
          leak = reading[j];
          sign = s;
          attribute = j;
        }
    }
    // Nothing else can leak, or (calibrated) nothing moves beyond the instrument: no leaked attribute.
    if (!(leak > -Infinity)) leak = 0;
    if (attribute >= 0 && leak === 0 && screen.calibrated) attribute = -1;
    const tv = m[sign * K + t];
    return { leak, sign, attribute, t, target: tv, ratio: tv > 1e-12 ? leak / tv : Infinity };
  };
  const full = pick(Float64Array.from(cols, mean));
  return {
    leak: bootstrap.interval(cols, (m) => pick(m).leak),
    strength: full.sign === 0 ? reference : -reference,
    attribute: full.attribute,
    target: bootstrap.interval(cols, (m) => pick(m).target),
    ratio: bootstrap.interval(cols, (m) => pick(m).ratio),
    targetIndex: full.t,
  };
}

/** The largest leak reading at one strength, with the attribute chosen inside each resample. */
export function leakAtStrength(bootstrap: ProbeBootstrap, changes: ChangeColumns, target: number, screen: LeakScreen = noScreen()): Interval & { attribute: number } {
  const cols = absColumns(changes);
  const worst = (m: Float64Array) => {
    const reading = leakReadings(m, target, screen);
    let best = -1;
    for (let j = 0; j < m.length; j++) if (reading[j] > -Infinity && (best < 0 || reading[j] > reading[best])) best = j;
    return { j: best, value: best < 0 ? 0 : reading[best] };
  };
  const full = worst(Float64Array.from(cols, mean));
  if (full.j < 0) return { value: 0, low: 0, high: 0, attribute: -1 };
  return { ...bootstrap.interval(cols, (m) => worst(m).value), attribute: full.value === 0 && screen.calibrated ? -1 : full.j };
}

/**
 * Probe-level exceedance: x of n probes whose own leak (largest |Δa_j|/σ_j over the attributes
 * that can leak and both reference signs) reaches `threshold`, with the Clopper–Pearson interval.
 * `share[s][j]` is, on the full sample at each sign, the part of attribute j's mean change that
 * lies beyond the instrument's allowance (its leak reading ÷ its mean change; NaN: never a leak):
 * each probe's change is discounted by it, so a measure whose mean change the instrument explains
 * entirely counts for nothing on any single probe (one probe's scatter of a noisy measure is not a
 * leak), and a measure with no allowance counts in full. Without it every non-target attribute
 * counts in full. A probe on which no such attribute is measurable is left out of the count.
 */
export function exceedance(plus: ChangeColumns, minus: ChangeColumns, target: number, threshold: number, confidence = 0.95, share: [ArrayLike<number>, ArrayLike<number>] | null = null): { threshold: number; probes: number; count: number; share: number; low: number; high: number } {
  const n = plus[0]?.length ?? 0;
  const K = plus.length;
  const counts = (s: number, j: number) => j !== target && !(share && Number.isNaN(share[s][j]));
  const anyCounts = [0, 1].some((s) => Array.from({ length: K }, (_, j) => counts(s, j)).some(Boolean));
  let count = 0;
  let probes = 0;
  for (let p = 0; p < n; p++) {
    let leak = 0;
    let measurable = false;
    [plus, minus].forEach((side, s) => {
      for (let j = 0; j < K; j++) {
        if (!counts(s, j)) continue;
        const v = Math.abs(side[j][p]);
        if (Number.isNaN(v)) continue;
        measurable = true;
        leak = Math.max(leak, v * (share ? share[s][j] : 1));
      }
    });
    if (!measurable && anyCounts) continue;
    probes++;
    if (leak >= threshold) count++;
  }
  if (probes === 0) return { threshold, probes: 0, count: 0, share: NaN, low: 0, high: 1 };
  return { threshold, probes, count, ...clopperPearson(count, probes, confidence) };
}

/**
 * Path lengths below this (in the audit's distance per σ^p) are rendering noise, not change: an
 * inert direction's path length is float32 rounding (1e-9 to 1e-7 on the demo and the Disc), a
 * visible direction's 1e-3 and up. A "spike" between two noise values is not a break.
 */
export const PATH_LENGTH_FLOOR = 1e-6;

export interface BreakPoint {
  strength: number;
  side: 'negative' | 'positive';
  cause: string;
}

export interface SafeRangeInput {
  /** Grid strengths (0 included or not). */
  strengths: number[];
  /** Leak interval at each strength (null at 0), attribute names for causes. */
  leaks: ((Interval & { attribute: number }) | null)[];
  attributeNames: string[];
  /** Path-length mean at each grid strength where measured (NaN elsewhere) and the calm median (|t| ≤ 1). */
  pathLength: number[];
  calmPathLength: number;
  spikeRatio: number;
  leakPass: number;
  leakFail: number;
}

/**
 * Breaks on each side: the first strength (moving out from 0) where the path length spikes
 * (more than spikeRatio × its median over |t| ≤ 1), or where a leak sets in: it started clean
 * (upper bound under leakPass at the first grid point of that side), is now confidently past
 * leakFail (lower bound at or above it) and grows per unit strength at least spikeRatio × faster
 * than at that first point. A leak that grows in step with the strength is a leak, not a break.
 */
export function findBreaks(x: SafeRangeInput): { negative: BreakPoint | null; positive: BreakPoint | null } {
  const side = (sign: 1 | -1): BreakPoint | null => {
    const order = x.strengths.map((s, i) => [s, i] as const).filter(([s]) => s * sign > 0).sort((a, b) => Math.abs(a[0]) - Math.abs(b[0]));
    if (!order.length) return null;
    const first = x.leaks[order[0][1]];
    const cleanStart = first !== null && first.high < x.leakPass;
    for (const [s, i] of order) {
      const p = x.pathLength[i];
      if (Number.isFinite(p) && x.calmPathLength > 0 && p > PATH_LENGTH_FLOOR && p > x.spikeRatio * x.calmPathLength) {
        return { strength: s, side: sign > 0 ? 'positive' : 'negative', cause: `path length spikes ×${(p / x.calmPathLength).toFixed(1)}` };
      }
      const l = x.leaks[i];
      const onset = first !== null && l !== null && l.value / Math.abs(s) >= x.spikeRatio * (first.value / Math.abs(order[0][0]));
      if (cleanStart && l && l.low >= x.leakFail && onset) return { strength: s, side: sign > 0 ? 'positive' : 'negative', cause: `leak into ${x.attributeNames[l.attribute] ?? 'another attribute'} reaches ${l.value.toFixed(2)} σ (95% CI ${l.low.toFixed(2)}–${l.high.toFixed(2)})` };
    }
    return null;
  };
  return { negative: side(-1), positive: side(1) };
}

/**
 * Safe range: the widest interval around 0 on which the upper confidence bound of the leak stays
 * under leakPass and nothing breaks, searched on both sides (each side stops before its first
 * failing grid point or its break).
 */
export function safeRange(x: SafeRangeInput, breaks: { negative: BreakPoint | null; positive: BreakPoint | null }): [number, number] {
  const side = (sign: 1 | -1) => {
    const br = sign > 0 ? breaks.positive : breaks.negative;
    let edge = 0;
    for (const [s, i] of x.strengths.map((v, k) => [v, k] as const).filter(([v]) => v * sign > 0).sort((a, b) => Math.abs(a[0]) - Math.abs(b[0]))) {
      const l = x.leaks[i];
      if (!l || !(l.high < x.leakPass)) break;
      if (br && Math.abs(s) >= Math.abs(br.strength)) break;
      edge = s;
    }
    return edge;
  };
  return [side(-1), side(1)];
}

export { MAX_EXCEEDANCE_SHARE, MIN_TARGET_EFFECT, VERDICT_RULE } from '../../protocol/verdict-rule.ts';
import { MAX_EXCEEDANCE_SHARE, MIN_TARGET_EFFECT } from '../../protocol/verdict-rule.ts';

export interface VerdictInput {
  leak: Interval;
  target: Interval;
  exceedanceHigh: number;
  safeRange: [number, number];
  reference: number;
  breaks: { negative: BreakPoint | null; positive: BreakPoint | null };
  leakPass: number;
  leakFail: number;
  enoughProbes: boolean;
}

/** Applies VERDICT_RULE; returns the verdict and the clause that decided it. */
export function verdictFor(x: VerdictInput): { verdict: 'pass' | 'review' | 'fail'; decidedBy: string } {
  const nearestBreak = [x.breaks.negative, x.breaks.positive].filter((b): b is BreakPoint => b !== null).map((b) => Math.abs(b.strength));
  const breakWithin = (limit: number) => nearestBreak.some((s) => s <= limit);
  if (!(Math.abs(x.target.value) > 0) || Math.max(Math.abs(x.target.low), Math.abs(x.target.high)) < MIN_TARGET_EFFECT) return { verdict: 'fail', decidedBy: 'target barely moves' };
  if (x.leak.low >= x.leakFail) return { verdict: 'fail', decidedBy: 'leak confidently at or above the fail threshold' };
  if (breakWithin(x.reference)) return { verdict: 'fail', decidedBy: 'breaks within ±reference' };
  const covers = x.safeRange[0] <= -x.reference && x.safeRange[1] >= x.reference;
  if (x.leak.high < x.leakPass && x.exceedanceHigh <= MAX_EXCEEDANCE_SHARE && covers && !breakWithin(x.reference + 1) && x.enoughProbes) return { verdict: 'pass', decidedBy: 'leak confidently under the pass threshold' };
  return { verdict: 'review', decidedBy: 'neither confidently clean nor confidently failing' };
}
