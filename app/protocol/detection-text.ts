// How the audit words what its instrument can detect (app/core/audit/detection.ts computes it):
// shared by the report's warnings, the CLI's calibration table and the app's instrument table, so
// the three say it in the same words. Pure text; no computation beyond formatting.

/** The verdict thresholds, in σ of the leaked attribute (settings leakPass and leakFail). */
export interface LeakThresholds {
  leakPass: number;
  leakFail: number;
}

/**
 * 'fail': the limit is at or above leakFail — a leak as large as the fail threshold reads as none,
 * the measure cannot see a failing leak; 'review': at or above leakPass only — a leak at the pass
 * threshold reads as none, it cannot tell pass from review; null: a leak at the pass threshold
 * registers (an unknown limit, NaN, claims nothing).
 */
export type Blindness = 'fail' | 'review' | null;

/** What a measure's limit lets it see, in the words the CLI's table and the app's instrument table use. */
export function detectionWords(blindTo: Blindness, t: LeakThresholds): string {
  return blindTo === 'fail' ? 'cannot see a failing leak' : blindTo === 'review' ? 'cannot tell pass from review' : `sees a ${t.leakPass} σ leak`;
}

/** A measure blind at a threshold: for every direction (its noise floor) or for one (cross-talk). */
export interface BlindMeasure {
  attribute: string;
  /** its detection limit, σ of the attribute */
  limit: number;
  blindTo: 'fail' | 'review';
  /** set when an exact operation's cross-talk set the limit: the attribute that operation owns */
  via?: string;
}

/** A limit in σ as the text shows it: 0.0043, 0.91, 12.3, 119 (a limit of 100 σ needs no decimals; a tiny one keeps two digits). */
export function formatLimit(v: number): string {
  if (!Number.isFinite(v)) return String(v);
  const a = Math.abs(v);
  if (a === 0) return '0';
  return a >= 100 ? v.toFixed(0) : a >= 10 ? v.toFixed(1) : a >= 0.1 ? v.toFixed(2) : String(Number(v.toPrecision(2)));
}

/**
 * The blind measures of a calibration in words, one sentence per threshold they hide (fail first),
 * as the report's warnings say it: "subject_detail cannot detect a leak below 119 σ and
 * shape_roundness below 0.91 σ on this generator — at or above the fail threshold (0.5 σ): a
 * failing leak into them would read as none".
 */
export function blindnessSentences(blind: BlindMeasure[], t: LeakThresholds): string[] {
  const out: string[] = [];
  for (const level of ['fail', 'review'] as const) {
    const xs = blind.filter((b) => b.blindTo === level);
    if (!xs.length) continue;
    const list = xs.map((b, i) => `${b.attribute}${i === 0 ? ' cannot detect a leak' : ''} below ${formatLimit(b.limit)} σ`);
    const joined = list.length === 1 ? list[0] : `${list.slice(0, -1).join(', ')} and ${list[list.length - 1]}`;
    const them = xs.length === 1 ? 'it' : 'them';
    out.push(
      level === 'fail'
        ? `${joined} on this generator — at or above the fail threshold (${t.leakFail} σ): a failing leak into ${them} would read as none`
        : `${joined} on this generator — at or above the pass threshold (${t.leakPass} σ): ${xs.length === 1 ? 'it cannot' : 'they cannot'} tell pass from review`,
    );
  }
  return out;
}
