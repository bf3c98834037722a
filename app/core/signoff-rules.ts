// The rules of sign-off and of using directions, in one place. Pure: the engine host, the CLI and
// (through the engine's answers) the app all ask this module what is allowed, so a rule cannot
// hold in one of them and not in another.
//
//  - Approval gate: a direction may be approved plainly only when the newest audit of its CURRENT
//    vector (matched by hash, and made after its last change) passed on at least
//    MIN_SIGNOFF_PROBES probes. Approving anything else needs an override with a written reason
//    (REASON_RULE: length, two words and some variety).
//  - Transitions: moving to the status a direction already has is refused (it would only add a
//    meaningless line to the review log).
//  - Use in variant sets and apply: unapproved or rejected directions and strengths outside the
//    audited safe range are refused unless forced with a written reason; the violations that were
//    forced are returned so the caller records them in its manifest.
import { PlumblineError } from './errors.ts';
import { MIN_USEFUL_PROBES } from './audit/settings.ts';
import { REASON_RULE, reasonProblem } from '../protocol/reason-rule.ts';

export const REVIEW_STATUSES = ['draft', 'in-review', 'approved', 'rejected'] as const;
export type ReviewStatus = (typeof REVIEW_STATUSES)[number];
export type Verdict = 'pass' | 'review' | 'fail' | 'no-measure';

/**
 * Fewest probes an audit may have and still support a plain approval. Below 30 samples a
 * bootstrap interval of a mean is too wide to decide anything (common practice: n ≥ 30); the
 * audit itself refuses to pass below the same count, so the two can never disagree.
 */
export const MIN_SIGNOFF_PROBES = MIN_USEFUL_PROBES;

export { MIN_REASON_LENGTH, REASON_RULE, reasonProblem } from '../protocol/reason-rule.ts';
/** One stored audit result of one direction, as the project keeps it. */
export interface AuditRecord {
  /** ISO time the audit finished. */
  at: string;
  /** Project-relative file of the full report. */
  file: string;
  /** Hash of the vector that was audited (null for reports written before hashes were kept). */
  vectorHash: string | null;
  verdict: Verdict;
  reason: string;
  probes: number;
  safeRange: [number, number];
}

export type GateState = 'passing' | 'failed' | 'needs-review' | 'too-few-probes' | 'stale' | 'unaudited';

export interface Gate {
  state: GateState;
  /** The audit the gate was decided on (the newest of the current vector), if any. */
  audit: AuditRecord | null;
  /** One sentence an art lead can read. */
  explanation: string;
}

/**
 * What the audits say about approving a direction now. `changedAt` is when its vector last
 * changed (null if unknown); audits made before it do not count even if the hash matches.
 */
export function approvalGate(direction: { vectorHash: string; changedAt: string | null }, audits: readonly AuditRecord[], minProbes = MIN_SIGNOFF_PROBES): Gate {
  const current = audits
    .filter((a) => a.vectorHash === direction.vectorHash && (!direction.changedAt || a.at >= direction.changedAt))
    .sort((a, b) => (a.at < b.at ? 1 : a.at > b.at ? -1 : 0));
  const audit = current[0] ?? null;
  if (!audit) {
    return audits.length
      ? { state: 'stale', audit: null, explanation: 'audited, but not in its current form: the direction changed after its last audit' }
      : { state: 'unaudited', audit: null, explanation: 'never audited' };
  }
  if (audit.verdict === 'fail') return { state: 'failed', audit, explanation: `its last audit failed: ${audit.reason}` };
  // An audit with no measure for the target judged nothing: it supports no approval either.
  if (audit.verdict === 'no-measure') return { state: 'needs-review', audit, explanation: `its last audit had no measure for its target, so it judged nothing: ${audit.reason}` };
  if (audit.verdict === 'review') return { state: 'needs-review', audit, explanation: `its last audit needs review: ${audit.reason}` };
  if (audit.probes < minProbes) return { state: 'too-few-probes', audit, explanation: `its last audit used ${audit.probes} probes; approval needs at least ${minProbes}` };
  if (audit.verdict !== 'pass') return { state: 'needs-review', audit, explanation: `its last audit did not pass: ${audit.reason}` };
  return { state: 'passing', audit, explanation: `passed its last audit on ${audit.probes} probes` };
}

export type Allowance = 'yes' | 'override' | 'no';
export interface Transition {
  to: ReviewStatus;
  allowed: Allowance;
  /** Why it is refused or needs an override; empty when plainly allowed. */
  why: string;
}

/** Every status and whether a direction at `status` may move there, given its approval gate. */
export function transitions(status: ReviewStatus, gate: Gate): Transition[] {
  return REVIEW_STATUSES.map((to) => {
    if (to === status) return { to, allowed: 'no', why: `already ${status}` };
    if (to === 'approved' && gate.state !== 'passing') return { to, allowed: 'override', why: gate.explanation };
    return { to, allowed: 'yes', why: '' };
  });
}

export interface Override {
  reason: string;
}

/** A written reason meets the rule of app/protocol/reason-rule.ts (length, words, variety). */
function reasonOk(o: Override | null | undefined): boolean {
  return !!o && reasonProblem(o.reason) === null;
}

/**
 * Checks one sign-off step. Returns whether it is an override (to be recorded as one); throws
 * PlumblineError('bad-request') naming the direction and the rule when it is refused.
 */
export function checkTransition(name: string, status: ReviewStatus, to: ReviewStatus, gate: Gate, override: Override | null): { override: boolean } {
  const t = transitions(status, gate).find((x) => x.to === to)!;
  if (t.allowed === 'no') throw new PlumblineError('bad-request', `'${name}' is ${t.why}; nothing to record`);
  if (t.allowed === 'yes') return { override: false };
  if (!reasonOk(override)) {
    throw new PlumblineError('bad-request', `'${name}' cannot be approved plainly: ${t.why}. Approving it anyway needs an override with a written reason: ${override ? reasonProblem(override.reason) : REASON_RULE}`);
  }
  return { override: true };
}

/** What a variant set or an apply knows about each direction it uses. */
export interface DirectionUse {
  name: string;
  /** Sign-off status, or null where no sign-off is known (a bare directions file outside a project). */
  status: ReviewStatus | null;
  /** Audited safe range in σ, or null where no audit is known. */
  safeRange: [number, number] | null;
}

export type ViolationKind = 'rejected' | 'unapproved' | 'outside-safe-range';
export interface Violation {
  setting: string;
  direction: string;
  kind: ViolationKind;
  strength: number;
  message: string;
}

/** Every rule a set of strength settings breaks (empty when all is allowed). */
export function useViolations(settings: readonly { label: string; strengths: Record<string, number> }[], directions: readonly DirectionUse[]): Violation[] {
  const byName = new Map(directions.map((d) => [d.name, d]));
  const out: Violation[] = [];
  for (const s of settings)
    for (const [name, strength] of Object.entries(s.strengths)) {
      if (strength === 0) continue;
      const d = byName.get(name);
      if (!d) throw new PlumblineError('bad-request', `setting '${s.label}' uses unknown direction '${name}'; available: ${[...byName.keys()].join(', ') || 'none'}`);
      if (d.status === 'rejected') out.push({ setting: s.label, direction: name, kind: 'rejected', strength, message: `${name} was rejected at sign-off` });
      else if (d.status !== null && d.status !== 'approved') out.push({ setting: s.label, direction: name, kind: 'unapproved', strength, message: `${name} is not approved (${d.status})` });
      if (d.safeRange && (strength < d.safeRange[0] || strength > d.safeRange[1])) {
        out.push({ setting: s.label, direction: name, kind: 'outside-safe-range', strength, message: `${name}=${strength} is outside its audited safe range ${d.safeRange[0]}…${d.safeRange[1]} σ` });
      }
    }
  return out;
}

/**
 * Refuses a use with violations unless forced with a written reason; returns the forced
 * violations (for the manifest). `how` tells the user how to force (differs by CLI and app).
 */
export function checkUse(violations: readonly Violation[], force: Override | null, how: string): { forced: Violation[]; reason: string | null } {
  if (violations.length === 0) return { forced: [], reason: null };
  const list = violations.map((v) => `setting '${v.setting}': ${v.message}`).join('; ');
  if (!force) throw new PlumblineError('use-refused', `refusing ${list}; ${how}`);
  if (!reasonOk(force)) throw new PlumblineError('use-refused', `forcing ${list} needs a written reason: ${reasonProblem(force.reason)}; ${how}`);
  return { forced: [...violations], reason: force.reason.trim() };
}
