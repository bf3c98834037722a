// Audit step 4, the verdict: turns one direction's statistics into pass / review / fail and a
// reason in words that says only what the numbers support, and a pair's non-additivity into
// additive / interacts. Pure; thresholds come from the audit settings.
import type { AuditSettings } from './settings.ts';
import type { CombinationStatistics, DirectionStatistics } from './statistics.ts';

export type DirectionVerdict = 'pass' | 'review' | 'fail';
export type CombinationVerdict = 'additive' | 'interacts';

/** A target effect smaller than this (in σ of the target, at the reference strength) means the direction does not move its target. */
const MIN_TARGET_EFFECT = 0.05;
/** Non-additivity below this (in σ of the attribute) counts as additive. */
export const ADDITIVE_LIMIT = 0.15;

export function judgeDirection(stats: DirectionStatistics, x: { reference: number; settings: Pick<AuditSettings, 'leakPass' | 'leakFail'>; fewProbes: boolean; pathLengthGrid: number[] }): { verdict: DirectionVerdict; reason: string } {
  const { leakage: L } = stats;
  const { settings: S, reference: ref } = x;
  const parts: string[] = [];
  const at = `at strength ${formatStrength(L.strength)}`;
  const leakText = `leaks into ${L.attribute}: ${L.value.toFixed(2)} of the target effect ${at} (95% CI ${L.low.toFixed(2)}–${L.high.toFixed(2)})`;
  const covers = stats.safeRange[0] <= -ref && stats.safeRange[1] >= ref;
  let verdict: DirectionVerdict;
  if (!(Math.abs(stats.targetEffect.value) > MIN_TARGET_EFFECT)) {
    verdict = 'fail';
    parts.push(`barely moves its target ${stats.target} (${stats.targetEffect.value.toFixed(2)} σ at ${formatStrength(ref)})`);
  } else if (L.value >= S.leakFail) {
    verdict = 'fail';
    parts.push(leakText);
  } else if (L.value < S.leakPass && covers && L.high < S.leakFail) {
    verdict = 'pass';
    parts.push(`clean within ±${ref}: largest leak ${L.value.toFixed(2)} (${L.attribute}) of the target effect`);
  } else {
    verdict = 'review';
    parts.push(L.value >= S.leakPass ? leakText : `largest leak ${L.value.toFixed(2)} (${L.attribute}) but the interval reaches ${L.high.toFixed(2)}`);
  }
  if (stats.breaksAt !== null && stats.breaksAt <= ref + 1) {
    const spikeText = stats.spikes.length ? `; path length spikes ×${(stats.pathLengthMeans[x.pathLengthGrid.indexOf(stats.spikes[0])] / stats.calmMedian).toFixed(1)} at ${formatStrength(stats.spikes[0])}` : '';
    parts.push(`breaks from ${formatStrength(stats.breaksAt)}${spikeText}`);
    if (verdict === 'pass') verdict = 'review';
  }
  if (!covers) parts.push(`safe range ${formatStrength(stats.safeRange[0])} to ${formatStrength(stats.safeRange[1])}`);
  if (stats.targetChosen) parts.push(`no target was named; took ${stats.target}, the attribute it moves most`);
  if (x.fewProbes && verdict === 'pass') {
    verdict = 'review';
    parts.push('too few probes to pass');
  }
  return { verdict, reason: parts.join('; ') };
}

export function judgeCombination(stats: CombinationStatistics): CombinationVerdict {
  return stats.attributeInteraction.value < ADDITIVE_LIMIT ? 'additive' : 'interacts';
}

/** A strength as a slider shows it: +2, -1.5, 0. */
export const formatStrength = (s: number) => (s > 0 ? `+${s}` : `${s}`);
