// The leak beyond the instrument (app/core/audit/statistics.ts leakScreen with leakage.ts): with a
// calibrated instrument an attribute's leak is its mean |Δ|/σ beyond its allowance — what the
// instrument shows by itself (floorMultiple × noise floor; crossTalkMultiple × an exact
// operation's cross-talk × the change of the attribute that operation owns) — recomputed inside
// every bootstrap resample.
//  - coverage by simulation: synthetic probes with known spreads; the truth
//    max_j(E|Δ_j| − allowance_j) uses folded-normal means from scipy.stats.foldnorm through
//    /usr/bin/python3 (outside reference); over 200 repetitions the nominal 95% interval must cover
//    it in 90–98% of them (binomial spread of 200 draws at p = 0.95 is ±3%; the selection of the
//    worst attribute inside a max makes BCa slightly conservative or liberal near ties, so the band
//    is widened by 2% at the bottom);
//  - worked examples: a change wholly within the allowance names no leak and is listed as within
//    the instrument; a change beyond it leaks by exactly the excess; NaN (not measurable) probes
//    are left out of every mean; one probe's scatter of a measure the instrument explains on
//    average does not count in the exceedance.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { Random } from '../../app/core/random.ts';
import { ProbeBootstrap } from '../../app/core/stats.ts';
import { combinationAllowance, combinationStatistics, directionStatistics, type DirectionMeasurements, type InstrumentAllowance, type StatisticsGrid } from '../../app/core/audit/statistics.ts';
import { runPythonJson, scipySkip } from '../helpers/python.ts';

const ATTRIBUTES = ['size', 'hue', 'backdrop'];
const PLAN: StatisticsGrid = { grid: [-2, 0, 2], pathLengthGrid: [0], reference: 2, settings: { leakPass: 0.2, leakFail: 0.5, worstProbes: 3, pathLength: { spikeRatio: 3 } } };
/** hue's noise floor 0.05 σ; the operation owning `size` moves `backdrop` by 0.1 of its own change. */
const INSTRUMENT: InstrumentAllowance = {
  floor: [0.01, 0.05, 0.01],
  crossTalk: (owner) => (owner === 'size' ? [0, 0, 0.1] : [0, 0, 0]),
  floorMultiple: 2,
  crossTalkMultiple: 1.5,
};

/** Measurements from per-attribute columns at +2 and −2 (strength 0 has none); path length constant. */
function measurements(plus: Float64Array[], minus: Float64Array[]): DirectionMeasurements {
  const n = plus[0].length;
  return { change: [minus, null, plus], pathLength: [new Float64Array(n).fill(1)] };
}
const constant = (n: number, v: number) => new Float64Array(n).fill(v);
const seedsOf = (n: number) => Array.from({ length: n }, (_, i) => i);

test('worked example: wholly within the allowance names no leak; beyond it leaks by exactly the excess', () => {
  const n = 40;
  // size +1.5 σ on every probe; hue 0.08 σ (under 2 × 0.05); backdrop 0.1 σ (under 1.5 × 0.1 × 1.5 = 0.225).
  const within = measurements([constant(n, 1.5), constant(n, 0.08), constant(n, 0.1)], [constant(n, -1.5), constant(n, 0.08), constant(n, 0.1)]);
  const a = directionStatistics(within, PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 200, 1), undefined, INSTRUMENT);
  assert.equal(a.leakage.attribute, 'none');
  assert.equal(a.leakage.value, 0);
  assert.deepEqual(a.withinInstrument.map((w) => w.attribute).sort(), ['backdrop', 'hue']);
  assert.equal(a.exceedance.count, 0);
  // Without the instrument the same numbers are a plain attribute-dependency leak of 0.1 σ (backdrop).
  const raw = directionStatistics(within, PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 200, 1));
  assert.equal(raw.leakage.attribute, 'backdrop');
  assert.ok(Math.abs(raw.leakage.value - 0.1) < 1e-12);

  // backdrop 0.6 σ: beyond its allowance 1.5 × 0.1 × 1.5 = 0.225 by 0.375 σ, on every probe alike.
  const beyond = measurements([constant(n, 1.5), constant(n, 0.08), constant(n, 0.6)], [constant(n, -1.5), constant(n, 0.08), constant(n, 0.6)]);
  const b = directionStatistics(beyond, PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 200, 1), undefined, INSTRUMENT);
  assert.equal(b.leakage.attribute, 'backdrop');
  assert.ok(Math.abs(b.leakage.value - 0.375) < 1e-9, `leak ${b.leakage.value}`);
  assert.ok(Math.abs(b.leakage.low - 0.375) < 1e-9 && Math.abs(b.leakage.high - 0.375) < 1e-9);
  // Each probe's 0.6 σ counts for its share beyond the allowance, 0.375 / 0.6 of it: 0.375 ≥ 0.2.
  assert.equal(b.exceedance.count, n);
});

test('not measurable (NaN) probes are left out of every mean and of the exceedance', () => {
  const n = 40;
  const hue = Float64Array.from({ length: n }, (_, p) => (p % 2 ? NaN : 0.5));
  const m = measurements([constant(n, 1.5), hue, constant(n, 0)], [constant(n, -1.5), hue, constant(n, 0)]);
  const s = directionStatistics(m, PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 200, 1));
  assert.equal(s.leakage.attribute, 'hue');
  assert.ok(Math.abs(s.leakage.value - 0.5) < 1e-12, 'the mean over the 20 measurable probes');
  assert.equal(s.notMeasurable.hue, n / 2);
  // Every probe still has backdrop measurable, so none is left out; the 20 with hue 0.5 σ leak.
  assert.equal(s.exceedance.probes, n);
  assert.equal(s.exceedance.count, n / 2);
});

test('one probe of a measure the instrument explains on average does not count as a leaking probe', () => {
  const n = 40;
  // hue: mean 0.08 σ (within 2 × 0.05) but one probe at 0.9 σ — that measure's own scatter.
  const hue = Float64Array.from({ length: n }, (_, p) => (p === 7 ? 0.9 : (0.08 * n - 0.9) / (n - 1)));
  const m = measurements([constant(n, 1.5), hue, constant(n, 0)], [constant(n, -1.5), hue, constant(n, 0)]);
  const s = directionStatistics(m, PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 200, 1), undefined, INSTRUMENT);
  assert.equal(s.exceedance.count, 0);
  // Without the instrument that probe is a leaking probe.
  const raw = directionStatistics(m, PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 200, 1));
  assert.equal(raw.exceedance.count, 1);
});

/** Per attribute (size, hue, backdrop) and sign: mean and spread of the signed change per probe. */
const DESIGN = {
  plus: [[1.5, 0.3], [0.12, 0.1], [0.5, 0.2]],
  minus: [[-1.4, 0.3], [0.1, 0.1], [0.35, 0.2]],
} as const;

test('the 95% interval of the leak beyond the instrument covers the known value in 90–98% of 200 simulated audits', { skip: scipySkip }, () => {
  const folded = runPythonJson<number[][]>(`
import json, sys
from scipy.stats import foldnorm
d = json.load(sys.stdin)
print(json.dumps([[float(foldnorm(abs(m) / s, scale=s).mean()) for m, s in side] for side in (d['plus'], d['minus'])]))`, DESIGN);
  // Truth per sign: hue beyond 2 × 0.05, backdrop beyond 1.5 × 0.1 × E|Δ size|; the larger over both signs.
  const beyond = (side: number[]) => Math.max(0, side[1] - 0.1, side[2] - 1.5 * 0.1 * side[0]);
  const truth = Math.max(beyond(folded[0]), beyond(folded[1]));
  const repetitions = 200;
  const n = 48;
  const rng = new Random(20261202, 0x5c4e);
  let covered = 0;
  for (let r = 0; r < repetitions; r++) {
    const side = (spec: readonly (readonly [number, number])[]) => spec.map(([mu, sd]) => Float64Array.from({ length: n }, () => mu + sd * rng.normal()));
    const s = directionStatistics(measurements(side(DESIGN.plus), side(DESIGN.minus)), PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 400, r + 1), undefined, INSTRUMENT);
    if (s.leakage.low <= truth && truth <= s.leakage.high) covered++;
  }
  const rate = covered / repetitions;
  process.stdout.write(`# leak beyond the instrument: truth ${truth.toFixed(4)} σ, covered in ${covered} of ${repetitions}\n`);
  assert.ok(rate >= 0.9 && rate <= 0.98, `coverage ${rate}`);
});

test('a pair counts only the non-additivity beyond what the instrument shows by itself', () => {
  const n = 40;
  // hue's three measured changes carry its noise: √3 × 2 × 0.05 = 0.173 σ of non-additivity is allowed.
  const allowance = combinationAllowance(ATTRIBUTES, INSTRUMENT, [1.5, 0, 0], [1.0, 0, 0]);
  assert.ok(Math.abs(allowance[1] - 2 * Math.sqrt(3) * 0.05) < 1e-12);
  // backdrop: the size operation's cross-talk 0.1 × (1.5 + 1.0) σ of size moved, × 1.5.
  assert.ok(Math.abs(allowance[2] - 1.5 * 0.1 * 2.5) < 1e-12);
  const within = combinationStatistics({ attributeChange: [constant(n, 0), constant(n, 0.1), constant(n, 0.3)], imageInteraction: constant(n, 0.01) }, ATTRIBUTES, 200, 1, allowance);
  assert.equal(within.attribute, 'none');
  assert.equal(within.attributeInteraction.value, 0);
  // 0.6 σ of hue non-additivity is beyond it by 0.6 − 0.173.
  const beyond = combinationStatistics({ attributeChange: [constant(n, 0), constant(n, 0.6), constant(n, 0.3)], imageInteraction: constant(n, 0.01) }, ATTRIBUTES, 200, 1, allowance);
  assert.equal(beyond.attribute, 'hue');
  assert.ok(Math.abs(beyond.attributeInteraction.value - (0.6 - 2 * Math.sqrt(3) * 0.05)) < 1e-5);
  // Without an instrument the raw largest non-additivity is the statistic.
  assert.equal(combinationStatistics({ attributeChange: [constant(n, 0), constant(n, 0.1), constant(n, 0.3)], imageInteraction: constant(n, 0.01) }, ATTRIBUTES, 200, 1).attribute, 'backdrop');
});
