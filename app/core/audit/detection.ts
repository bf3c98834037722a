// What the instrument can detect (issue 9): a calibrated audit counts a leak into a measure only
// beyond what the instrument shows by itself (leakScreen in statistics.ts, max(0, mean − allowance)),
// so the smallest leak it can register in a measure is that allowance — its detection limit:
// floorMultiple × its noise floor for every direction, more for a direction whose target's exact
// operation shows cross-talk into it. A leak no larger than the limit reads as none, and a larger
// one reads as its excess over the limit. A measure whose limit reaches a verdict threshold is
// blind at that threshold on this generator: a leak that large into it could never register, so
// a pass says nothing about it. Pure; the report, the CLI text and the app's instrument table
// read these (the report carries them, so the app need not recompute).

import { detectionWords, formatLimit, blindnessSentences, type Blindness, type BlindMeasure, type LeakThresholds } from '../../protocol/detection-text.ts';

export { detectionWords, formatLimit, blindnessSentences, type Blindness, type BlindMeasure, type LeakThresholds };


/** The smallest leak beyond the instrument, in σ of the measure: floorMultiple × its noise floor. */
export function detectionLimit(noiseFloor: number, floorMultiple: number): number {
  return floorMultiple * noiseFloor;
}

/** Which threshold a detection limit hides (see Blindness). */
export function blindness(limit: number, t: LeakThresholds): Blindness {
  if (limit >= t.leakFail) return 'fail';
  if (limit >= t.leakPass) return 'review';
  return null;
}

/** A measure's detection limit and what it hides, as the report's calibration carries them. */
export interface MeasureDetection {
  /** smallest leak beyond the instrument (σ of the measure); a leak up to this size reads as none */
  detectionLimit: number;
  blindTo: Blindness;
}

export function measureDetection(noiseFloor: number, floorMultiple: number, t: LeakThresholds): MeasureDetection {
  const limit = detectionLimit(noiseFloor, floorMultiple);
  return { detectionLimit: limit, blindTo: blindness(limit, t) };
}

/**
 * The judged measures of a calibration that are blind at either threshold, worst (largest limit)
 * first. `judged(name) === false` leaves out a composite or descriptor that is never a leak.
 */
export function blindMeasures(measures: Record<string, { noiseFloor: number }>, floorMultiple: number, t: LeakThresholds, judged: (name: string) => boolean = () => true): BlindMeasure[] {
  const out: BlindMeasure[] = [];
  for (const [attribute, m] of Object.entries(measures)) {
    if (!judged(attribute)) continue;
    const { detectionLimit: limit, blindTo } = measureDetection(m.noiseFloor, floorMultiple, t);
    if (blindTo) out.push({ attribute, limit, blindTo });
  }
  return out.sort((a, b) => b.limit - a.limit);
}

/**
 * The blind measures of one direction in a verdict's reason, compactly, one clause per threshold
 * (the per-measure limits are in the report's calibration, its warnings and the instrument
 * tables): "cannot see a failing leak (0.5 σ) into subject_detail or shape_roundness (detection
 * limits 0.91–119 σ on this generator)". A limit set by cross-talk holds for this direction only,
 * and the clause says which exact operation set it.
 */
export function blindnessClauses(blind: BlindMeasure[], t: LeakThresholds): string[] {
  const out: string[] = [];
  for (const level of ['fail', 'review'] as const) {
    const xs = blind.filter((b) => b.blindTo === level);
    if (!xs.length) continue;
    const names = xs.map((b) => b.attribute);
    const list = names.length === 1 ? names[0] : `${names.slice(0, -1).join(', ')} or ${names[names.length - 1]}`;
    const limits = xs.map((b) => b.limit);
    const lo = Math.min(...limits);
    const hi = Math.max(...limits);
    const range = lo === hi ? `detection limit${xs.length === 1 ? '' : 's'} ${formatLimit(lo)} σ` : `detection limits ${formatLimit(lo)}–${formatLimit(hi)} σ`;
    const via = [...new Set(xs.flatMap((b) => (b.via ? [b.via] : [])))];
    const scope = via.length ? `for this direction; ${xs.every((b) => b.via) ? '' : 'some '}set by cross-talk of the exact operation that moves ${via.join(' or ')}` : 'on this generator';
    out.push(level === 'fail' ? `cannot see a failing leak (${t.leakFail} σ) into ${list} (${range} ${scope})` : `cannot tell pass from review for ${list} (${range} ${scope})`);
  }
  return out;
}
