// Leakage statistics and the verdict rule (app/core/audit/leakage.ts):
//  - interval coverage by simulation (METHODS §10): synthetic per-probe responses with a known
//    leak plus noise go through the same statistics code as the audit; over 200 repetitions the
//    nominal 95% interval must cover the truth in 92–98% of them (binomial spread ±3%). The true
//    leak is the largest folded-normal mean E|N(μ, s²)| over attributes and signs, computed by
//    scipy.stats.foldnorm through /usr/bin/python3 (outside reference);
//  - the selection (sign, worst attribute) made inside each resample;
//  - exceedance bounds are Clopper–Pearson (checked against SciPy in stats-reference.test.ts);
//  - safe range searched on both sides, negative-side breaks found and named.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { Random } from '../../app/core/random.ts';
import { ProbeBootstrap } from '../../app/core/stats.ts';
import { MAX_EXCEEDANCE_SHARE, VERDICT_RULE, exceedance, findBreaks, leakAtReference, leakAtStrength, safeRange, verdictFor, type SafeRangeInput } from '../../app/core/audit/leakage.ts';
import { runPythonJson, scipySkip } from '../helpers/python.ts';

/** Per attribute (target first) and sign: mean and spread of the signed change Δa/σa per probe. */
const DESIGN = {
  plus: [[1.5, 0.3], [0.3, 0.25], [0, 0.05], [0.05, 0.05]],
  minus: [[-1.4, 0.3], [-0.2, 0.25], [0, 0.05], [0.02, 0.05]],
} as const;

function draw(rng: Random, n: number) {
  const side = (spec: readonly (readonly [number, number])[]) => spec.map(([m, s]) => Float64Array.from({ length: n }, () => m + s * rng.normal()));
  return { plus: side(DESIGN.plus), minus: side(DESIGN.minus) };
}

test('the 95% leak interval covers the known leak in 92–98% of 200 simulated audits', { skip: scipySkip }, () => {
  const folded = runPythonJson<number[][]>(`
import json, sys
from scipy.stats import foldnorm
d = json.load(sys.stdin)
print(json.dumps([[float(foldnorm(abs(m) / s, scale=s).mean()) for m, s in side] for side in (d['plus'], d['minus'])]))`, DESIGN);
  // Truth: the largest E|Δ| over non-target attributes (1..3) and both signs.
  const truth = Math.max(...folded[0].slice(1), ...folded[1].slice(1));
  const repetitions = 200;
  const probes = 48;
  let covered = 0;
  let ratioCovered = 0;
  const trueRatio = folded[0][1] / folded[0][0];
  const rng = new Random(2026);
  for (let r = 0; r < repetitions; r++) {
    const { plus, minus } = draw(rng, probes);
    const s = leakAtReference(new ProbeBootstrap(probes, 1000, 1000 + r), plus, minus, 0, 2);
    if (s.leak.low <= truth && truth <= s.leak.high) covered++;
    if (s.ratio.low <= trueRatio && trueRatio <= s.ratio.high) ratioCovered++;
  }
  const coverage = covered / repetitions;
  console.log(`coverage of the 95% leak interval: ${covered}/${repetitions} = ${(coverage * 100).toFixed(1)}% (true leak ${truth.toFixed(4)} σ); ratio readout ${ratioCovered}/${repetitions}`);
  assert.ok(coverage >= 0.92 && coverage <= 0.98, `coverage ${coverage}`);
});

test('sign and worst attribute are chosen inside each resample', () => {
  // Two attributes leak about equally (0.4 σ) on opposite signs. The statistic bootstrapped is the
  // max over both candidates, re-picked in every resample — not the one the full sample picks.
  const rng = new Random(5);
  const n = 40;
  const plus = [Float64Array.from({ length: n }, () => 1.5 + 0.2 * rng.normal()), Float64Array.from({ length: n }, () => 0.4 + 0.3 * rng.normal()), Float64Array.from({ length: n }, () => 0.01 * rng.normal())];
  const minus = [Float64Array.from({ length: n }, () => -1.5 + 0.2 * rng.normal()), Float64Array.from({ length: n }, () => 0.01 * rng.normal()), Float64Array.from({ length: n }, () => 0.4 + 0.3 * rng.normal())];
  const boot = new ProbeBootstrap(n, 2000, 9);
  const inside = leakAtReference(boot, plus, minus, 0, 2);
  const abs = (c: Float64Array) => c.map(Math.abs);
  const maxOfBoth = boot.interval([abs(plus[1]), abs(minus[2])], (m) => Math.max(m[0], m[1]));
  assert.deepEqual(inside.leak, maxOfBoth);
  const fixed = inside.strength > 0 ? boot.interval([abs(plus[1])], (m) => m[0]) : boot.interval([abs(minus[2])], (m) => m[0]);
  assert.notDeepEqual(inside.leak, fixed, 'a selection fixed outside the bootstrap gives another interval');
  // An unnamed target is chosen inside too: attribute 0 moves most.
  assert.equal(leakAtReference(boot, plus, minus, null, 2).targetIndex, 0);
});

test('exceedance counts probes whose own leak reaches the threshold, with Clopper–Pearson bounds', () => {
  const n = 48;
  const zero = () => new Float64Array(n);
  const clean = exceedance([Float64Array.from({ length: n }, () => 2), zero()], [Float64Array.from({ length: n }, () => -2), zero()], 0, 0.2);
  assert.equal(clean.count, 0);
  // Rule of three, two-sided exact: 1 − 0.025^{1/48}.
  assert.ok(Math.abs(clean.high - (1 - 0.025 ** (1 / 48))) < 1e-12);
  assert.ok(clean.high <= MAX_EXCEEDANCE_SHARE, '48 clean probes can pass');
  // The limit is what 0 leaking probes of 30 give (two-sided exact): 1 − 0.025^{1/30}.
  assert.ok(Math.abs(MAX_EXCEEDANCE_SHARE - (1 - 0.025 ** (1 / 30))) < 1e-15);
  const few = exceedance([Float64Array.from({ length: 29 }, () => 2), new Float64Array(29)], [new Float64Array(29), new Float64Array(29)], 0, 0.2);
  assert.ok(few.high > MAX_EXCEEDANCE_SHARE, '29 clean probes cannot pass');
  const leaky = zero();
  leaky[3] = 0.5;
  leaky[7] = -0.3;
  const some = exceedance([zero(), leaky], [zero(), zero()], 0, 0.2);
  assert.equal(some.count, 2);
});

function rangeInput(over: Partial<SafeRangeInput>): SafeRangeInput {
  const strengths = [-3, -2, -1, 0, 1, 2, 3];
  return {
    strengths,
    leaks: strengths.map((s) => (s === 0 ? null : { value: 0.01, low: 0, high: 0.02, attribute: 1 })),
    attributeNames: ['t', 'a', 'b'],
    pathLength: strengths.map(() => 1),
    calmPathLength: 1,
    spikeRatio: 5,
    leakPass: 0.2,
    leakFail: 0.5,
    ...over,
  };
}

test('safe range is searched on both sides and a negative-side break is found and named', () => {
  const clean = rangeInput({});
  const none = findBreaks(clean);
  assert.deepEqual(none, { negative: null, positive: null });
  assert.deepEqual(safeRange(clean, none), [-3, 3]);
  // A spike at −2 only.
  const spiky = rangeInput({ pathLength: [1, 9, 1, 1, 1, 1, 1] });
  const b = findBreaks(spiky);
  assert.equal(b.positive, null);
  assert.deepEqual(b.negative, { strength: -2, side: 'negative', cause: 'path length spikes ×9.0' });
  assert.deepEqual(safeRange(spiky, b), [-1, 3]);
  // A leak that starts clean and is confidently past the fail threshold at −3, named with its attribute.
  const leaks = clean.leaks.slice();
  leaks[0] = { value: 0.7, low: 0.6, high: 0.8, attribute: 2 };
  const onset = findBreaks(rangeInput({ leaks }));
  assert.equal(onset.negative!.strength, -3);
  assert.match(onset.negative!.cause, /leak into b reaches 0\.70 σ/);
  // A leak growing in step with the strength (0.19 σ per σ: clean at ±1, its lower bound 0.54
  // past the fail threshold at ±3) is a leak, not a break.
  const linear = rangeInput({ leaks: clean.strengths.map((s) => (s === 0 ? null : { value: 0.19 * Math.abs(s), low: 0.18 * Math.abs(s), high: 0.199 * Math.abs(s), attribute: 1 })) });
  assert.deepEqual(findBreaks(linear), { negative: null, positive: null });
  // An upper bound that touches the pass threshold ends the safe range there, without a break.
  const wide = clean.leaks.slice();
  wide[5] = { value: 0.1, low: 0.05, high: 0.25, attribute: 1 };
  assert.deepEqual(safeRange(rangeInput({ leaks: wide }), findBreaks(rangeInput({ leaks: wide }))), [-3, 1]);
});

test('the verdict rule: bounds against thresholds, as written in VERDICT_RULE', () => {
  const base = { leak: { value: 0.02, low: 0.01, high: 0.05 }, target: { value: 1.5, low: 1.4, high: 1.6 }, exceedanceHigh: 0.07, safeRange: [-3, 3] as [number, number], reference: 2, breaks: { negative: null, positive: null }, leakPass: 0.2, leakFail: 0.5, enoughProbes: true };
  assert.equal(verdictFor(base).verdict, 'pass');
  assert.equal(verdictFor({ ...base, exceedanceHigh: 0.12 }).verdict, 'review');
  assert.equal(verdictFor({ ...base, leak: { value: 0.15, low: 0.1, high: 0.22 } }).verdict, 'review');
  assert.equal(verdictFor({ ...base, leak: { value: 0.6, low: 0.45, high: 0.8 } }).verdict, 'review', 'point over fail, lower bound under: not confidently failing');
  assert.equal(verdictFor({ ...base, leak: { value: 0.6, low: 0.52, high: 0.8 } }).verdict, 'fail');
  assert.equal(verdictFor({ ...base, target: { value: 0.01, low: -0.02, high: 0.03 } }).verdict, 'fail');
  assert.equal(verdictFor({ ...base, breaks: { negative: { strength: -2, side: 'negative', cause: 'x' }, positive: null } }).verdict, 'fail');
  assert.equal(verdictFor({ ...base, breaks: { negative: null, positive: { strength: 3, side: 'positive', cause: 'x' } } }).verdict, 'review');
  assert.equal(verdictFor({ ...base, enoughProbes: false }).verdict, 'review');
  assert.ok(VERDICT_RULE.some((l) => l.startsWith('pass')) && VERDICT_RULE.some((l) => l.startsWith('fail')));
});

test('leak at one strength picks the worst non-target attribute inside each resample', () => {
  const rng = new Random(1);
  const n = 30;
  const cols = [Float64Array.from({ length: n }, () => 1), Float64Array.from({ length: n }, () => 0.3 + 0.05 * rng.normal()), Float64Array.from({ length: n }, () => 0.05 * rng.normal())];
  const r = leakAtStrength(new ProbeBootstrap(n, 500, 2), cols, 0);
  assert.equal(r.attribute, 1);
  assert.ok(r.low <= r.value && r.value <= r.high && r.low > 0.25);
});
