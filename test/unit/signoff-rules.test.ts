// The sign-off and use rules, checked case by case against the rules as the issue states them
// (issue 11, "Sign-off gates" and "The same rules everywhere"): the specification lives outside
// this module, and each case below quotes the clause it checks. Property checks (fast-check) cover
// every combination of status and gate state.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import fc from 'fast-check';
import {
  MIN_REASON_LENGTH, MIN_SIGNOFF_PROBES, REASON_RULE, REVIEW_STATUSES, approvalGate, checkTransition, checkUse, reasonProblem, transitions, useViolations,
  type AuditRecord, type Gate, type GateState,
} from '../../app/core/signoff-rules.ts';

const audit = (over: Partial<AuditRecord>): AuditRecord => ({ at: '2026-01-02T10:00:00.000Z', file: 'audits/a.json', vectorHash: 'h1', verdict: 'pass', reason: 'clean', probes: 64, safeRange: [-3, 3], ...over });
const dir = { vectorHash: 'h1', changedAt: null };

test('"approval needs a passing audit of the direction\'s current vector (by hash)"', () => {
  assert.equal(approvalGate(dir, [audit({})]).state, 'passing');
  // A passing audit of another vector (the direction changed since) does not count.
  assert.equal(approvalGate(dir, [audit({ vectorHash: 'h0' })]).state, 'stale');
  assert.equal(approvalGate(dir, []).state, 'unaudited');
  // The newest audit of the current vector decides, not any passing one.
  assert.equal(approvalGate(dir, [audit({ at: '2026-01-02T10:00:00.000Z' }), audit({ at: '2026-01-03T10:00:00.000Z', verdict: 'fail', reason: 'leaks' })]).state, 'failed');
  assert.equal(approvalGate(dir, [audit({ at: '2026-01-03T10:00:00.000Z' }), audit({ at: '2026-01-02T10:00:00.000Z', verdict: 'fail' })]).state, 'passing');
  assert.equal(approvalGate(dir, [audit({ verdict: 'review' })]).state, 'needs-review');
});

test('"…on at least the minimum probe count" — 30, the common-practice floor for a mean\'s interval', () => {
  assert.equal(MIN_SIGNOFF_PROBES, 30); // common practice (n ≥ 30); also the audit's own floor for a pass
  assert.equal(approvalGate(dir, [audit({ probes: 29 })]).state, 'too-few-probes');
  assert.equal(approvalGate(dir, [audit({ probes: 30 })]).state, 'passing');
});

test('"…after its last change": audits older than the change do not count even with the same hash', () => {
  const changed = { vectorHash: 'h1', changedAt: '2026-01-05T00:00:00.000Z' };
  assert.equal(approvalGate(changed, [audit({ at: '2026-01-04T00:00:00.000Z' })]).state, 'stale');
  assert.equal(approvalGate(changed, [audit({ at: '2026-01-06T00:00:00.000Z' })]).state, 'passing');
});

test('"approving a failed, needs-review or unaudited direction needs an explicit override with a written reason"', () => {
  const failed = approvalGate(dir, [audit({ verdict: 'fail', reason: 'leaks into backdrop' })]);
  assert.throws(() => checkTransition('x', 'draft', 'approved', failed, null), /cannot be approved plainly: its last audit failed: leaks into backdrop/);
  assert.throws(() => checkTransition('x', 'draft', 'approved', failed, { reason: 'ok' }), /at least 12 characters/);
  assert.throws(() => checkTransition('x', 'draft', 'approved', failed, { reason: '            ' }), /written reason/);
  assert.deepEqual(checkTransition('x', 'draft', 'approved', failed, { reason: 'art direction accepts the darker backdrop' }), { override: true });
  // Twelve characters are not enough on their own: a reason has two words and some variety.
  assert.throws(() => checkTransition('x', 'draft', 'approved', failed, { reason: 'aaaaaaaaaaaa' }), /the reason is one word/);
  assert.throws(() => checkTransition('x', 'draft', 'approved', failed, { reason: 'aaaaaa aaaaaa' }), /the reason repeats 1 letter/);
  const unaudited = approvalGate(dir, []);
  assert.throws(() => checkTransition('x', 'in-review', 'approved', unaudited, null), /never audited/);
  // A passing direction is approved without an override (and a reason given anyway is not an override).
  assert.deepEqual(checkTransition('x', 'in-review', 'approved', approvalGate(dir, [audit({})]), null), { override: false });
});

test('"no-op transitions refused": draft → draft and the like', () => {
  const gate = approvalGate(dir, [audit({})]);
  for (const s of REVIEW_STATUSES) assert.throws(() => checkTransition('x', s, s, gate, { reason: 'a long enough reason' }), new RegExp(`already ${s}`));
});

test('"the controls show what is possible for each row": no plain Approve on a failed one (property over all states)', () => {
  const states: GateState[] = ['passing', 'failed', 'needs-review', 'too-few-probes', 'stale', 'unaudited'];
  fc.assert(fc.property(fc.constantFrom(...REVIEW_STATUSES), fc.constantFrom(...states), (status, state) => {
    const gate: Gate = { state, audit: null, explanation: state };
    const t = transitions(status, gate);
    assert.equal(t.length, 4);
    for (const x of t) {
      if (x.to === status) assert.equal(x.allowed, 'no');
      else if (x.to === 'approved') assert.equal(x.allowed, state === 'passing' ? 'yes' : 'override');
      else assert.equal(x.allowed, 'yes');
    }
  }));
});

test('"unapproved or rejected directions and strengths outside the safe range are refused unless forced with a reason"', () => {
  const dirs = [
    { name: 'crest', status: 'approved' as const, safeRange: [-2, 2] as [number, number] },
    { name: 'hue', status: 'rejected' as const, safeRange: [-3, 3] as [number, number] },
    { name: 'outline', status: 'in-review' as const, safeRange: null },
    { name: 'bare', status: null, safeRange: null },
  ];
  assert.deepEqual(useViolations([{ label: 'a', strengths: { crest: 1.5, bare: 9 } }], dirs), []);
  // A zero strength is not a use.
  assert.deepEqual(useViolations([{ label: 'a', strengths: { hue: 0 } }], dirs), []);
  const v = useViolations([{ label: 'big', strengths: { crest: 2.5, hue: 1, outline: 1 } }], dirs);
  assert.deepEqual(v.map((x) => `${x.direction}:${x.kind}`), ['crest:outside-safe-range', 'hue:rejected', 'outline:unapproved']);
  assert.throws(() => checkUse(v, null, 'force it with a reason'), /refusing setting 'big': crest=2.5 is outside its audited safe range -2…2 σ; setting 'big': hue was rejected/);
  assert.throws(() => checkUse(v, { reason: 'short' }, 'x'), new RegExp(`at least ${MIN_REASON_LENGTH} characters`));
  assert.throws(() => checkUse(v, { reason: 'aaaaaaaaaaaa' }, 'x'), (e: Error & { code?: string }) => e.code === 'use-refused' && /needs a written reason: the reason is one word/.test(e.message));
  const ok = checkUse(v, { reason: '  client asked for the extreme  ' }, 'x');
  assert.equal(ok.reason, 'client asked for the extreme');
  assert.equal(ok.forced.length, 3);
  assert.throws(() => useViolations([{ label: 'a', strengths: { nope: 1 } }], dirs), /unknown direction 'nope'/);
});

test('a written reason: at least 12 characters, two words and five different letters or digits, and the rule says so', () => {
  assert.equal(MIN_REASON_LENGTH, 12);
  assert.match(REASON_RULE, /at least 12 characters in 2 or more words, with at least 5 different letters or digits/);
  for (const good of ['needed for the trailer', 'art director ok’d it', 'test: unaudited direction', 'Änderung für den Kunden', '  client asked for the extreme  ']) assert.equal(reasonProblem(good), null, good);
  const bad: [string, RegExp][] = [
    ['', /no reason given/],
    ['ok', /is 2 characters/],
    ['aaaaaaaaaaaa', /one word/],
    ['approved_by_the_director', /one word/],
    ['aaaaaa aaaaaa', /repeats 1 letter/],
    ['ok ok ok ok ok', /repeats 2 letters/],
    ['ab ab ab ab ab ab', /repeats 2 letters/],
    ['!!! ??? ... ---', /one word/],
  ];
  for (const [text, why] of bad) assert.match(reasonProblem(text) ?? '', why, text);
  // Property: whatever passes is at least 12 characters long once trimmed and has two words.
  fc.assert(fc.property(fc.string({ maxLength: 40 }), (t) => reasonProblem(t) !== null || (t.trim().length >= 12 && t.trim().split(/\s+/).length >= 2)));
});
