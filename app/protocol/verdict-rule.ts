// The audit's one pass / review / fail rule in words, with the two constants it names. It lives
// in the protocol so the app's help can show it (the renderer imports only app/protocol); the
// rule is applied by verdictFor in app/core/audit/leakage.ts and documented in docs/audit-json.md.

/** Target changes below this (σ of the target, at the reference strength) count as not moving it. */
export const MIN_TARGET_EFFECT = 0.05;
/** The fewest probes whose verdict may pass (common practice: ≥ 30; as MIN_USEFUL_PROBES). */
const FEWEST_PASSING_PROBES = 30;
/**
 * A verdict may pass only if the exact upper bound of the share of leaking probes is at most what
 * a clean audit of the fewest passing probes gives: 0 of 30 bounds it at 1 − 0.025^{1/30} = 11.6%
 * (two-sided 95% Clopper–Pearson). So a clean 30-probe audit can pass; 1 leaking probe of 30
 * (17.2%) cannot; with 48 probes 1 leaking probe (11.1%) still can, 2 (14.3%) cannot.
 */
export const MAX_EXCEEDANCE_SHARE = 1 - 0.025 ** (1 / FEWEST_PASSING_PROBES);

/** The rule in words (report docs, every report's verdictRule, the app's help). Keep in step with verdictFor. */
export const VERDICT_RULE = [
  `fail — the target barely moves (the 95% interval of its mean change at +reference lies within ±${MIN_TARGET_EFFECT} σ), or the leak is confidently at or above the fail threshold (lower 95% bound of the leak ≥ leakFail), or the direction breaks within ±reference.`,
  `pass — the upper 95% bound of the leak is under the pass threshold (leakPass), the upper Clopper–Pearson bound of the share of probes whose own leak reaches leakPass is at most ${(MAX_EXCEEDANCE_SHARE * 100).toFixed(1)}% (what 0 leaking probes of ${FEWEST_PASSING_PROBES} give), the safe range covers ±reference, nothing breaks within reference + 1, and there are enough probes.`,
  'review — everything else: the data cannot tell pass from fail, or something short of failing needs a look.',
  'The leak is the largest mean |Δa|/σa over non-target attributes at ±reference (attribute dependency, Wu et al. 2021), in σ of the leaked attribute; the sign and attribute are chosen inside each bootstrap resample.',
];

