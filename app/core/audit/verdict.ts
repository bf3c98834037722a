// Audit step 4, the verdict: turns one direction's statistics into pass / review / fail and a
// reason in words that says only what the numbers support, and a pair's non-additivity into
// additive / interacts. Pure; thresholds come from the audit settings.
import { MIN_USEFUL_PROBES, type AuditSettings } from './settings.ts';
import type { CombinationStatistics, DirectionStatistics } from './statistics.ts';
import { MAX_EXCEEDANCE_SHARE, verdictFor } from './leakage.ts';
import { blindnessClauses } from './detection.ts';

/** 'no-measure': the direction's target has no measure in this audit, so nothing can be judged. */
export type DirectionVerdict = 'pass' | 'review' | 'fail' | 'no-measure';
export type CombinationVerdict = 'additive' | 'interacts';

/** Non-additivity below this (in σ of the attribute) counts as additive; judged on the upper 95% bound. */
export const ADDITIVE_LIMIT = 0.15;

/** Null-baseline percentiles shown with a verdict (see statistics.nullPercentiles). */
export interface NullPercentiles {
  count: number;
  targetEffect: number;
  leakage: number;
  pathLength: number;
}

/**
 * Applies the one rule (VERDICT_RULE in leakage.ts) and says why in words: the leak in σ of the
 * leaked attribute against the target's own change, the probe-level exceedance with its exact
 * bounds (what this probe count can and cannot rule out), breaks on either side by name, the
 * safe range and, when measured, the null-baseline percentiles.
 */
export function judgeDirection(stats: DirectionStatistics, x: { reference: number; settings: Pick<AuditSettings, 'leakPass' | 'leakFail'>; fewProbes: boolean; pathLengthGrid: number[]; nulls?: NullPercentiles | null; unmeasuredTarget?: string | null }): { verdict: DirectionVerdict; reason: string; decidedBy: string } {
  const L = stats.leakage;
  const { settings: S, reference: ref } = x;
  if (x.unmeasuredTarget) {
    // Judging it on whichever measure moved most would answer a question nobody asked.
    return {
      verdict: 'no-measure',
      decidedBy: 'no measure for the target',
      reason: `no measure for its target ${x.unmeasuredTarget} — define one (no card attribute, built-in measure, defined attribute or scorer is called ${x.unmeasuredTarget}); of the audited measures it moves ${stats.target} most (${fmt2(Math.abs(stats.targetEffect.value))} σ at ${formatStrength(ref)})`,
    };
  }
  const { verdict, decidedBy } = verdictFor({
    leak: L,
    target: stats.targetEffect,
    exceedanceHigh: stats.exceedance.high,
    safeRange: stats.safeRange,
    reference: ref,
    breaks: stats.breaks,
    leakPass: S.leakPass,
    leakFail: S.leakFail,
    enoughProbes: !x.fewProbes,
  });
  const parts: string[] = [];
  // One decimal always: the pass rule's 11.6% must not read as 12%.
  const pct = (v: number) => `${(v * 100).toFixed(1)}%`;
  const E = stats.exceedance;
  const exceedText = `${E.count} of ${E.probes} probes leak ≥ ${fmt2(E.threshold)} σ (95% CI ${pct(E.low)}–${pct(E.high)} of probes)`;
  const leakText = `leaks into ${L.attribute}: ${fmt2(L.value)} σ at strength ${formatStrength(L.strength)} (95% CI ${fmt2(L.low)}–${fmt2(L.high)}) against the target's own ${fmt2(L.targetChange.value)} σ`;
  // A pass is clean only where the instrument can see a leak: measures blind at a threshold (their
  // detection limit at or above it, detection.ts) are named right after, so it never reads as clean for them.
  const blind = stats.blind ?? [];
  const clean = `clean within ±${ref}${blind.length ? ' in the measures that can see a leak' : ''}`;
  if (decidedBy === 'target barely moves') parts.push(`barely moves its target ${stats.target} (${fmt2(stats.targetEffect.value)} σ at ${formatStrength(ref)})`);
  else if (verdict === 'pass' && L.attribute === 'none') parts.push(`${clean}: no other attribute moves beyond what the instrument shows by itself (its noise floor and cross-talk)`);
  else if (verdict === 'pass') parts.push(`${clean}: largest leak ${fmt2(L.value)} σ (${L.attribute}, 95% CI up to ${fmt2(L.high)}) against the target's ${fmt2(L.targetChange.value)} σ`);
  else if (L.high < S.leakPass) parts.push(`largest leak ${fmt2(L.value)} σ (${L.attribute}, 95% CI up to ${fmt2(L.high)}) against the target's ${fmt2(L.targetChange.value)} σ`);
  else parts.push(leakText);
  parts.push(exceedText);
  // Limits set by the noise floor hold on this generator; one set by cross-talk holds for this direction's change.
  parts.push(...blindnessClauses(blind, S));
  for (const b of [stats.breaks.negative, stats.breaks.positive]) if (b) parts.push(`breaks from ${formatStrength(b.strength)} (${b.side} side): ${b.cause}`);
  const covers = stats.safeRange[0] <= -ref && stats.safeRange[1] >= ref;
  if (!covers) parts.push(`safe range ${formatStrength(stats.safeRange[0])} to ${formatStrength(stats.safeRange[1])}`);
  if (verdict === 'review' && x.fewProbes && L.high < S.leakPass) parts.push(`too few probes to pass (a pass needs at least ${MIN_USEFUL_PROBES}, as does approval)`);
  else if (verdict === 'review' && L.high < S.leakPass && E.high > MAX_EXCEEDANCE_SHARE && covers) parts.push(`${E.probes} probes cannot rule out a leaking share above ${pct(MAX_EXCEEDANCE_SHARE)}`);
  if (stats.withinInstrument.length) {
    const shown = stats.withinInstrument.slice(0, 3).map((w) => `${w.attribute} ${fmt2(w.change)} σ${w.via ? ` (via ${w.via})` : ''}`).join(', ');
    parts.push(`set aside as within the instrument's own noise floor or cross-talk under exact transforms: ${shown}${stats.withinInstrument.length > 3 ? ` and ${stats.withinInstrument.length - 3} more` : ''}`);
  }
  if (x.nulls) parts.push(`against ${x.nulls.count} random directions: target effect at the ${ordinal(x.nulls.targetEffect)} percentile, leak ${ordinal(x.nulls.leakage)}, end-point path length ${ordinal(x.nulls.pathLength)}`);
  if (stats.targetChosen) parts.push(`no target was named; took ${stats.target}, the attribute it moves most`);
  return { verdict, reason: parts.join('; '), decidedBy };
}

const fmt2 = (v: number) => v.toFixed(2);
/** 81 → "81st", 63 → "63rd", 12 → "12th" (a percentile rounded to a whole number). */
export function ordinal(v: number): string {
  const n = Math.round(v);
  const teen = n % 100 >= 11 && n % 100 <= 13;
  return `${n}${teen ? 'th' : ['th', 'st', 'nd', 'rd'][n % 10] ?? 'th'}`;
}

export function judgeCombination(stats: CombinationStatistics): CombinationVerdict {
  return stats.attributeInteraction.high < ADDITIVE_LIMIT ? 'additive' : 'interacts';
}

/** A strength as a slider shows it: +2, -1.5, 0. */
export const formatStrength = (s: number) => (s > 0 ? `+${s}` : `${s}`);
