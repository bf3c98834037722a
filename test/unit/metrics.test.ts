// Disentanglement metrics against their definitions on worked cases: MIG (Chen et al. 2018) and
// DCI (Eastwood & Williams 2018). Mutual information follows sklearn's mutual_info_score (nats).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { dci, dciFromImportance, discretise, mig, mutualInformation, type Score } from '../../app/core/metrics.ts';

/** A score the test expects to be defined. */
const num = (s: Score): number => {
  assert.equal(typeof s, 'number', 'score is defined');
  return s as number;
};
import { Random } from '../../app/core/random.ts';

test('mutual information of discrete labels, worked by hand', () => {
  const x = Int32Array.from([0, 0, 1, 1]);
  assert.ok(Math.abs(mutualInformation(x, x) - Math.LN2) < 1e-12, 'I(X;X) = H(X) = ln 2 for a fair bit');
  assert.equal(mutualInformation(x, Int32Array.from([0, 1, 0, 1])), 0, 'independent');
  // p(x,y) = {(0,0): 1/2, (1,0): 1/4, (1,1): 1/4}, p(x) = (1/2, 1/2), p(y) = (3/4, 1/4): I = Σ p(x,y) ln[p(x,y) / (p(x)p(y))].
  const a = Int32Array.from([0, 0, 1, 1]);
  const b = Int32Array.from([0, 0, 0, 1]);
  const expected = 0.5 * Math.log(0.5 / (0.5 * 0.75)) + 0.25 * Math.log(0.25 / (0.5 * 0.75)) + 0.25 * Math.log(0.25 / (0.5 * 0.25));
  assert.ok(Math.abs(mutualInformation(a, b) - expected) < 1e-12);
  assert.deepEqual(Array.from(discretise([0, 0.5, 1, 0.26], 4)), [0, 2, 3, 1]);
});

test('DCI from importance matrices: identity, uniform and redundant codes', () => {
  const id = dciFromImportance([[1, 0, 0], [0, 1, 0], [0, 0, 1]]);
  assert.equal(id.disentanglement, 1);
  assert.equal(id.completeness, 1);
  const uniform = dciFromImportance([[1, 1], [1, 1]]);
  assert.ok(Math.abs(num(uniform.disentanglement)) < 1e-12 && Math.abs(num(uniform.completeness)) < 1e-12);
  // Two codes both for factor 0: each code is disentangled (D = 1) but factor 0 is spread (C = 0).
  const redundant = dciFromImportance([[1, 0], [1, 0]]);
  assert.equal(redundant.disentanglement, 1);
  assert.ok(Math.abs(num(redundant.completeness)) < 1e-12);
});

function samples(n: number, mixAngle: number) {
  const rng = new Random(21);
  const codes = new Float64Array(n * 2);
  const factors = new Float64Array(n * 2);
  const c = Math.cos(mixAngle);
  const s = Math.sin(mixAngle);
  for (let i = 0; i < n; i++) {
    const f0 = rng.uniform();
    const f1 = rng.uniform();
    factors[2 * i] = f0;
    factors[2 * i + 1] = f1;
    codes[2 * i] = c * f0 + s * f1;
    codes[2 * i + 1] = -s * f0 + c * f1;
  }
  return { codes, factors };
}

test('MIG and DCI: axis-aligned codes score high, 45°-mixed codes low', () => {
  const aligned = samples(4000, 0);
  const mixed = samples(4000, Math.PI / 4);
  const ma = num(mig(aligned.codes, 2, aligned.factors, 2).mig);
  const mm = num(mig(mixed.codes, 2, mixed.factors, 2).mig);
  assert.ok(ma > 0.85, `aligned MIG ${ma}`);
  assert.ok(mm < 0.15, `mixed MIG ${mm}`);
  const da = dci(aligned.codes, 2, aligned.factors, 2);
  const dm = dci(mixed.codes, 2, mixed.factors, 2);
  assert.ok(num(da.disentanglement) > 0.99 && num(da.completeness) > 0.99 && num(da.informativeness) > 0.99);
  assert.ok(num(dm.disentanglement) < 0.01, `mixed D ${dm.disentanglement}`);
  assert.ok(num(dm.informativeness) > 0.99, 'a rotation loses no information');
});

// Known answers in the style of disentanglement_lib's own metric tests (mig_test.py: a perfect
// representation scores 0.9–1.0, an all-zero one 0.0–0.2, a duplicated one 0.0–0.1), on data
// like its DummyData: 10 independent factors of 10 equally likely values each, the
// representation read from the factors, 3,000 samples (DummyData's exact layout from memory).
function dummyData(n: number, seed: number) {
  const rng = new Random(seed);
  const K = 10;
  const factors = new Float64Array(n * K);
  for (let i = 0; i < n * K; i++) factors[i] = rng.int(10);
  return { factors, K };
}

test('MIG known answers: perfect code 0.9–1.0, all-zero codes 0.0–0.2, duplicated codes 0.0–0.1', () => {
  const n = 3000;
  const { factors, K } = dummyData(n, 12);
  const perfect = num(mig(factors, K, factors, K).mig);
  assert.ok(perfect >= 0.9 && perfect <= 1.0, `perfect ${perfect}`);
  const zeros = num(mig(new Float64Array(n * K), K, factors, K).mig);
  assert.ok(zeros >= 0 && zeros <= 0.2, `zeros ${zeros}`);
  const duplicated = new Float64Array(n * 2 * K);
  for (let i = 0; i < n; i++)
    for (let k = 0; k < K; k++) {
      duplicated[i * 2 * K + k] = factors[i * K + k];
      duplicated[i * 2 * K + K + k] = factors[i * K + k];
    }
  const dup = num(mig(duplicated, 2 * K, factors, K).mig);
  assert.ok(dup >= 0 && dup <= 0.1, `duplicated ${dup}`);
});

test("scores the definitions leave undefined say 'undefined' (one code, one factor)", () => {
  const n = 500;
  const { factors } = dummyData(n, 3);
  const oneFactor = Float64Array.from({ length: n }, (_, i) => factors[i * 10]);
  const oneCode = Float64Array.from(oneFactor);
  assert.equal(mig(oneCode, 1, oneFactor, 1).mig, 'undefined', 'MIG needs a second code for its gap');
  const two = new Float64Array(n * 2);
  for (let i = 0; i < n; i++) {
    two[2 * i] = factors[i * 10];
    two[2 * i + 1] = factors[i * 10 + 1];
  }
  const d1 = dci(two, 2, oneFactor, 1);
  assert.equal(d1.disentanglement, 'undefined', 'entropy in base K = 1');
  assert.equal(typeof d1.completeness, 'number');
  const d2 = dci(oneCode, 1, two, 2);
  assert.equal(d2.completeness, 'undefined', 'entropy in base J = 1');
  assert.equal(typeof d2.disentanglement, 'number');
});
